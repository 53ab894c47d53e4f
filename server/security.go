package server

import (
	"net"
	"net/http"
	"net/url"
	"strings"
)

// Request checks shared by HTTP and the websocket upgrade:
//
//  1. Host: the Host header must be a loopback name or address (localhost,
//     127.0.0.0/8, ::1) or one of Config.AllowedHosts, and, once the server
//     knows the ports it serves, one of those ports. This defeats DNS
//     rebinding: a page at evil.example whose name is re-pointed to
//     127.0.0.1 still sends Host: evil.example.
//  2. Origin: a request without an Origin header comes from a non-browser
//     client (curl, the CLI, the LibreOffice extension) and is allowed,
//     because browsers always send Origin on cross-site requests, on POST
//     and on websocket upgrades. A request with an Origin is allowed only
//     from the server's own origin (a loopback name with the port of the Host
//     header and the server's scheme) or an exact entry of
//     Config.AllowedOrigins. "null" origins (sandboxed frames, file pages)
//     are rejected unless listed. This stops a web page in the user's browser
//     from reading results (cross-site request forgery and cross-site
//     websocket hijacking).
//  3. Writes (functions marked Writes, PUT and DELETE of models) also need
//     the install token (see ReadOrCreateToken).
//  4. A server allowed to listen where other computers can reach it
//     (Config.AllowRemote, which needs TLS) wants the token on every
//     request and every call, reads included; without AllowRemote it
//     refuses to listen anywhere but on loopback.

// isLoopbackHost reports whether host (no port) names the loopback interface.
func isLoopbackHost(host string) bool {
	if host == "localhost" {
		return true
	}
	ip := net.ParseIP(host)
	return ip != nil && ip.IsLoopback()
}

// splitHostPort splits a Host header; the port defaults from the scheme.
func splitHostPort(hostport string, tls bool) (host, port string) {
	host, port, err := net.SplitHostPort(hostport)
	if err != nil {
		host = strings.TrimSuffix(strings.TrimPrefix(hostport, "["), "]")
		port = ""
	}
	if port == "" {
		port = "80"
		if tls {
			port = "443"
		}
	}
	return strings.TrimSuffix(strings.ToLower(host), "."), port
}

// hostAllowed checks the Host header.
func (s *Server) hostAllowed(r *http.Request) (bool, string) {
	if r.Host == "" {
		return false, "the request has no Host header"
	}
	host, port := splitHostPort(r.Host, r.TLS != nil)
	if !isLoopbackHost(host) && !s.extraHosts[host] {
		return false, "the Host header does not name this computer's loopback interface (possible DNS rebinding)"
	}
	s.mu.Lock()
	defer s.mu.Unlock()
	if len(s.ports) > 0 && !s.ports[port] {
		return false, "the Host header names a port this server does not listen on"
	}
	return true, ""
}

// normalizeOrigin lower-cases scheme and host and drops a trailing slash.
func normalizeOrigin(o string) string {
	return strings.TrimSuffix(strings.ToLower(strings.TrimSpace(o)), "/")
}

// originAllowed checks the Origin header (see the rules above).
func (s *Server) originAllowed(r *http.Request) bool {
	raw, present := r.Header["Origin"]
	if !present || len(raw) == 0 {
		return true
	}
	if len(raw) > 1 {
		return false
	}
	o := normalizeOrigin(raw[0])
	if s.extraOrigins[o] {
		return true
	}
	u, err := url.Parse(o)
	if err != nil || u.Host == "" || u.Path != "" || u.User != nil {
		return false
	}
	scheme := "http"
	if r.TLS != nil {
		scheme = "https"
	}
	if u.Scheme != scheme {
		return false
	}
	oh, op := splitHostPort(u.Host, scheme == "https")
	_, hp := splitHostPort(r.Host, r.TLS != nil)
	return isLoopbackHost(oh) && op == hp
}

// guard applies the Host and Origin checks and CORS headers to every
// request.
func (s *Server) guard(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if ok, why := s.hostAllowed(r); !ok {
			s.log.Warn("request rejected", "reason", "host", "host", truncate(r.Host, 80))
			writeTransportError(w, http.StatusForbidden, why)
			return
		}
		if !s.originAllowed(r) {
			s.log.Warn("request rejected", "reason", "origin", "origin", truncate(r.Header.Get("Origin"), 80))
			writeTransportError(w, http.StatusForbidden, "requests from the web page at "+truncate(r.Header.Get("Origin"), 80)+" are not allowed; add its origin to the server's allowed origins if it is your add-in")
			return
		}
		if o := r.Header.Get("Origin"); o != "" {
			h := w.Header()
			h.Set("Access-Control-Allow-Origin", o)
			h.Add("Vary", "Origin")
			h.Set("Access-Control-Allow-Headers", "Content-Type, "+TokenHeader)
			h.Set("Access-Control-Allow-Methods", "GET, POST, PUT, DELETE, OPTIONS")
			h.Set("Access-Control-Max-Age", "600")
			if r.Header.Get("Access-Control-Request-Private-Network") == "true" {
				h.Set("Access-Control-Allow-Private-Network", "true")
			}
		}
		if r.Method == http.MethodOptions {
			w.WriteHeader(http.StatusNoContent)
			return
		}
		if s.cfg.AllowRemote && strings.HasPrefix(r.URL.Path, "/v1/") && r.URL.Path != "/v1/call" && r.URL.Path != "/v1/ws" &&
			!tokenOK(s.token, r.Header.Get(TokenHeader)) {
			// Calls and websocket messages are checked one by one (the
			// token may travel inside them).
			writeTransportError(w, http.StatusUnauthorized, "this server accepts requests from other computers, so every request needs the install token in the "+TokenHeader+" header: run `veer token` to see it")
			return
		}
		next.ServeHTTP(w, r)
	})
}

func truncate(s string, n int) string {
	if len(s) > n {
		return s[:n] + "…"
	}
	return s
}

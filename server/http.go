package server

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"runtime"
	"sync"
	"sync/atomic"
	"time"

	"veer/functions/cell"
)

func (s *Server) routes() http.Handler {
	mux := http.NewServeMux()
	mux.HandleFunc("POST /v1/call", s.handleCall)
	mux.HandleFunc("GET /v1/functions", s.handleFunctions)
	mux.HandleFunc("GET /v1/models", s.handleModels)
	mux.HandleFunc("GET /v1/models/{ref}", s.handleModelGet)
	mux.HandleFunc("PUT /v1/models/{name}", s.handleModelPut)
	mux.HandleFunc("DELETE /v1/models/{name}", s.handleModelDelete)
	mux.HandleFunc("GET /v1/health", s.handleHealth)
	mux.HandleFunc("GET /v1/ws", s.handleWS)
	mux.Handle("GET /addin/", s.staticHandler())
	return mux
}

// writeTransportError answers a request that could not be processed at all
// with an HTTP error status and {"error": {"code": "#VALUE!", "message": ...}}.
func writeTransportError(w http.ResponseWriter, status int, msg string) {
	code := cell.CodeValue
	if status == http.StatusServiceUnavailable {
		code = cell.CodeBusy
	}
	writeJSONBytes(w, status, appendAnswer(nil, nil, nil, &cell.Error{Code: code, Message: msg}, false))
}

func writeJSONBytes(w http.ResponseWriter, status int, b []byte) {
	h := w.Header()
	h.Set("Content-Type", "application/json; charset=utf-8")
	h.Set("Cache-Control", "no-store")
	h.Set("X-Content-Type-Options", "nosniff")
	w.WriteHeader(status)
	w.Write(b)
}

func writeJSON(w http.ResponseWriter, status int, v any) {
	b, err := json.Marshal(v)
	if err != nil {
		writeTransportError(w, http.StatusInternalServerError, "internal error encoding the answer")
		return
	}
	writeJSONBytes(w, status, append(b, '\n'))
}

// readBody reads a request body within the size limit.
func (s *Server) readBody(w http.ResponseWriter, r *http.Request, limit int64) ([]byte, bool) {
	body, err := io.ReadAll(http.MaxBytesReader(w, r.Body, limit))
	if err != nil {
		var mbe *http.MaxBytesError
		if errors.As(err, &mbe) {
			writeTransportError(w, http.StatusRequestEntityTooLarge, fmt.Sprintf("the request is larger than the limit of %s; split it into smaller batches", byteSize(limit)))
		} else {
			writeTransportError(w, http.StatusBadRequest, "could not read the request")
		}
		return nil, false
	}
	return body, true
}

func byteSize(n int64) string {
	switch {
	case n >= 1<<20 && n%(1<<20) == 0:
		return fmt.Sprintf("%d MiB", n>>20)
	case n >= 1<<10 && n%(1<<10) == 0:
		return fmt.Sprintf("%d KiB", n>>10)
	}
	return fmt.Sprintf("%d bytes", n)
}

func (s *Server) decodeLimits() decodeLimits {
	return decodeLimits{maxBatch: s.lim.MaxBatch, maxCells: s.lim.MaxCells}
}

// handleCall serves POST /v1/call: one call object or a batch array.
func (s *Server) handleCall(w http.ResponseWriter, r *http.Request) {
	start := time.Now()
	body, ok := s.readBody(w, r, s.lim.MaxRequestBytes)
	if !ok {
		return
	}
	reqs, batch, err := decodeRequests(body, s.decodeLimits())
	if err != nil {
		writeTransportError(w, http.StatusBadRequest, err.Error())
		return
	}
	headerOK := tokenOK(s.token, r.Header.Get(TokenHeader))
	outs := make([]*outcome, len(reqs))
	s.runBatch(len(reqs), func(i int) bool { return s.slowCall(&reqs[i]) }, func(i int) {
		req := &reqs[i]
		if req.cancel != nil {
			outs[i] = errOutcome(cell.WrongArgument.Errorf("\"cancel\" works only over the websocket"))
			return
		}
		opts := callOpts{needToken: s.cfg.AllowRemote, authorized: headerOK || tokenOK(s.token, req.token), tokenSent: r.Header.Get(TokenHeader) != ""}
		outs[i] = s.eng.call(r.Context(), req, opts)
	})
	var b []byte
	if batch {
		b = append(b, '[')
	}
	for i, o := range outs {
		if i > 0 {
			b = append(b, ',')
		}
		b = appendAnswer(b, reqs[i].id, o.val, o.err, false)
	}
	if batch {
		b = append(b, ']')
	}
	writeJSONBytes(w, http.StatusOK, append(b, '\n'))
	s.log.Debug("http call", "calls", len(reqs), "bytes_in", len(body), "bytes_out", len(b), "ms", msSince(start))
}

func msSince(t time.Time) float64 { return float64(time.Since(t).Microseconds()) / 1000 }

// runBatch runs each(0..n-1) on GOMAXPROCS workers (more only add
// contention for cheap calls); calls of functions marked Slow get their own
// goroutine so they do not hold up the cheap ones (the computation limit
// still applies to them).
func (s *Server) runBatch(n int, slow func(i int) bool, each func(i int)) {
	if n == 1 {
		each(0)
		return
	}
	workers := min(n, runtime.GOMAXPROCS(0))
	var next atomic.Int64
	var wg sync.WaitGroup
	wg.Add(workers)
	for range workers {
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				if slow != nil && slow(i) {
					wg.Add(1)
					go func() {
						defer wg.Done()
						each(i)
					}()
					continue
				}
				each(i)
			}
		}()
	}
	wg.Wait()
}

// slowCall reports whether a request calls a function marked Slow.
func (s *Server) slowCall(req *request) bool {
	if req.fn == "" {
		return false
	}
	f, ok := s.cfg.Catalogue.Lookup(req.fn)
	return ok && f.Slow
}

func (s *Server) handleFunctions(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, http.StatusOK, s.cfg.Catalogue.Listing())
}

func (s *Server) handleModels(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, http.StatusOK, map[string]any{"models": s.reg.List()})
}

func (s *Server) handleHealth(w http.ResponseWriter, r *http.Request) {
	writeJSON(w, http.StatusOK, map[string]any{"ok": true, "functions": s.cfg.Catalogue.Len()})
}

func statusOf(e *cell.Error) int {
	switch e.Code {
	case cell.CodeRef:
		return http.StatusNotFound
	case cell.CodeBusy:
		return http.StatusServiceUnavailable
	}
	return http.StatusBadRequest
}

// handleModelGet serves GET /v1/models/{ref}: the stored document of a model
// version, with its handle in the X-Veer-Handle header.
func (s *Server) handleModelGet(w http.ResponseWriter, r *http.Request) {
	m, err := s.reg.Get(r.PathValue("ref"))
	if err != nil {
		e := cell.AsError(err)
		writeJSONBytes(w, statusOf(e), appendAnswer(nil, nil, nil, e, false))
		return
	}
	ct := "application/octet-stream"
	if t := bytes.TrimSpace(m.Doc); len(t) > 0 && (t[0] == '{' || t[0] == '[') && json.Valid(t) {
		ct = "application/json"
	}
	w.Header().Set("Content-Type", ct)
	w.Header().Set("X-Veer-Handle", m.Handle)
	w.Header().Set("Cache-Control", "no-store")
	w.Header().Set("X-Content-Type-Options", "nosniff")
	w.Write(m.Doc)
}

func (s *Server) writeAllowed(w http.ResponseWriter, r *http.Request) bool {
	if tokenOK(s.token, r.Header.Get(TokenHeader)) {
		return true
	}
	writeTransportError(w, http.StatusUnauthorized, "writing models needs the install token in the "+TokenHeader+" header: run `veer token` to see it")
	return false
}

// handleModelPut serves PUT /v1/models/{name}: store the body as the latest
// version (token required).
func (s *Server) handleModelPut(w http.ResponseWriter, r *http.Request) {
	if !s.writeAllowed(w, r) {
		return
	}
	body, ok := s.readBody(w, r, min(s.lim.MaxRequestBytes, MaxModelBytes))
	if !ok {
		return
	}
	h, created, err := s.reg.Save(r.PathValue("name"), body)
	if err != nil {
		e := cell.AsError(err)
		writeJSONBytes(w, statusOf(e), appendAnswer(nil, nil, nil, e, false))
		return
	}
	status := http.StatusOK
	if created {
		status = http.StatusCreated
	}
	writeJSON(w, status, map[string]any{"handle": h, "created": created})
}

// handleModelDelete serves DELETE /v1/models/{name} (token required).
func (s *Server) handleModelDelete(w http.ResponseWriter, r *http.Request) {
	if !s.writeAllowed(w, r) {
		return
	}
	if err := s.reg.Delete(r.PathValue("name")); err != nil {
		e := cell.AsError(err)
		writeJSONBytes(w, statusOf(e), appendAnswer(nil, nil, nil, e, false))
		return
	}
	writeJSON(w, http.StatusOK, map[string]any{"deleted": true})
}

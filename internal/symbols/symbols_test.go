package symbols

import (
	"reflect"
	"testing"
)

// TestOneMeaning checks the key: every mark has a meaning, no two marks
// share a meaning, no two point marks share a shape, and the colours of
// the signal, rule, outside and expected marks are each used by no other
// mark.
func TestOneMeaning(t *testing.T) {
	v := reflect.ValueOf(Legend)
	meanings := map[string]string{}
	shapes := map[string]string{}
	inks := map[string][]string{}
	for i := 0; i < v.NumField(); i++ {
		name := v.Type().Field(i).Name
		m := v.Field(i).Interface().(Mark)
		if m.Meaning == "" || m.Shape == "" {
			t.Errorf("%s has no meaning or shape", name)
		}
		if o, ok := meanings[m.Meaning]; ok {
			t.Errorf("%s and %s both mean %q", name, o, m.Meaning)
		}
		meanings[m.Meaning] = name
		switch m.Shape {
		case "circle", "ring", "diamond", "square", "bar":
			if o, ok := shapes[m.Shape]; ok {
				t.Errorf("%s and %s are both drawn as %s", name, o, m.Shape)
			}
			shapes[m.Shape] = name
		}
		for _, c := range []string{m.Fill, m.Stroke} {
			if c != "none" && c != Black {
				inks[c] = append(inks[c], name)
			}
		}
	}
	for _, own := range []Mark{Legend.Signal, Legend.Rule, Legend.Outside, Legend.Expected} {
		c := own.Fill
		if c == "none" {
			c = own.Stroke
		}
		users := map[string]bool{}
		for _, n := range inks[c] {
			users[n] = true
		}
		// The limit is the signal's threshold and shares its colour.
		delete(users, "Limit")
		if len(users) > 1 {
			t.Errorf("colour %s is used by %v; it must mean one thing", c, inks[c])
		}
	}
}

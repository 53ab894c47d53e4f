package refcurve
import ("testing";"encoding/json")
func TestDbgBig(t *testing.T) {
	m, err := Fit(bigRows(), Options{})
	if err != nil { t.Fatal(err) }
	d := m.Curves[0].Diagnostics
	b, _ := json.MarshalIndent(d, "", " ")
	t.Log(string(b))
	for _, p := range m.Curves[0].MeanCV { t.Logf("mean %+v", p) }
	for _, p := range m.Curves[0].SDCV { t.Logf("sd %+v", p) }
	doc, _ := m.Encode()
	t.Log(len(doc))
}

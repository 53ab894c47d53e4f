package workbooks

import (
	"bytes"
	"encoding/xml"
	"strconv"
)

// OpenDocument namespaces used by the writer.
const (
	nsOffice   = "urn:oasis:names:tc:opendocument:xmlns:office:1.0"
	nsStyle    = "urn:oasis:names:tc:opendocument:xmlns:style:1.0"
	nsText     = "urn:oasis:names:tc:opendocument:xmlns:text:1.0"
	nsTable    = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"
	nsFO       = "urn:oasis:names:tc:opendocument:xmlns:xsl-fo-compatible:1.0"
	nsMeta     = "urn:oasis:names:tc:opendocument:xmlns:meta:1.0"
	nsDC       = "http://purl.org/dc/elements/1.1/"
	nsManifest = "urn:oasis:names:tc:opendocument:xmlns:manifest:1.0"
	nsOF       = "urn:oasis:names:tc:opendocument:xmlns:of:1.2"
	odsMime    = "application/vnd.oasis.opendocument.spreadsheet"
)

// odsWriter writes content.xml by hand: the layout is simple, and writing
// it directly keeps every byte under our control.
type odsWriter struct {
	b bytes.Buffer
}

func (w *odsWriter) s(parts ...string) {
	for _, p := range parts {
		w.b.WriteString(p)
	}
}

// esc writes s escaped for XML text or an attribute value (xml.EscapeText
// also escapes quotes, tabs and new lines).
func (w *odsWriter) esc(s string) {
	_ = xml.EscapeText(&w.b, []byte(s)) // writes to a bytes.Buffer cannot fail
}

// widthStyle names the column style of a width in characters.
func widthStyle(chars float64) string {
	return "co" + strconv.FormatFloat(chars, 'f', -1, 64)
}

// cm converts a width in characters to centimetres (about 0.19 cm per
// character of the default font, plus padding).
func cm(chars float64) string {
	return strconv.FormatFloat(0.19*chars+0.2, 'f', 2, 64) + "cm"
}

func num2s(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func (w *odsWriter) content(wb *workbook) {
	w.s(xml.Header)
	w.s(`<office:document-content xmlns:office="`, nsOffice, `" xmlns:style="`, nsStyle, `" xmlns:text="`, nsText,
		`" xmlns:table="`, nsTable, `" xmlns:fo="`, nsFO, `" xmlns:of="`, nsOF, `" office:version="1.2">`)
	// Column widths used anywhere, in a fixed order.
	var widths []float64
	seen := map[float64]bool{11: true}
	widths = append(widths, 11)
	for _, s := range wb.sheets {
		for c := 0; c < s.ncols; c++ {
			if v, ok := s.widths[c]; ok && !seen[v] {
				seen[v] = true
				widths = append(widths, v)
			}
		}
	}
	w.s(`<office:automatic-styles>`)
	for _, v := range widths {
		w.s(`<style:style style:name="`, widthStyle(v), `" style:family="table-column"><style:table-column-properties fo:break-before="auto" style:column-width="`, cm(v), `"/></style:style>`)
	}
	w.s(`<style:style style:name="ceBold" style:family="table-cell" style:parent-style-name="Default"><style:text-properties fo:font-weight="bold"/></style:style>`)
	w.s(`<style:style style:name="ceWrap" style:family="table-cell" style:parent-style-name="Default"><style:table-cell-properties fo:wrap-option="wrap" style:vertical-align="top"/><style:text-properties fo:font-weight="bold" fo:color="#9c2a00"/></style:style>`)
	w.s(`</office:automatic-styles><office:body><office:spreadsheet>`)
	for _, s := range wb.sheets {
		w.table(s)
	}
	w.s(`</office:spreadsheet></office:body></office:document-content>`)
}

func (w *odsWriter) table(s *sheet) {
	w.s(`<table:table table:name="`)
	w.esc(s.name)
	w.s(`">`)
	// Columns, with runs of equal widths merged.
	for c := 0; c < s.ncols; {
		v, ok := s.widths[c]
		if !ok {
			v = 11
		}
		n := 1
		for c+n < s.ncols {
			v2, ok2 := s.widths[c+n]
			if !ok2 {
				v2 = 11
			}
			if v2 != v {
				break
			}
			n++
		}
		w.s(`<table:table-column table:style-name="`, widthStyle(v), `"`)
		if n > 1 {
			w.s(` table:number-columns-repeated="`, strconv.Itoa(n), `"`)
		}
		w.s(`/>`)
		c += n
	}
	for r := 0; r < s.nrows; r++ {
		w.s(`<table:table-row>`)
		empty := 0
		flush := func() {
			if empty == 1 {
				w.s(`<table:table-cell/>`)
			} else if empty > 1 {
				w.s(`<table:table-cell table:number-columns-repeated="`, strconv.Itoa(empty), `"/>`)
			}
			empty = 0
		}
		last := -1
		for c := 0; c < s.ncols; c++ {
			if _, ok := s.cells[[2]int{r, c}]; ok {
				last = c
			}
		}
		for c := 0; c <= last; c++ {
			v, ok := s.cells[[2]int{r, c}]
			if !ok {
				empty++
				continue
			}
			flush()
			w.cell(v)
		}
		w.s(`</table:table-row>`)
	}
	w.s(`</table:table>`)
}

func (w *odsWriter) cell(v cell) {
	w.s(`<table:table-cell`)
	switch {
	case v.wrap:
		w.s(` table:style-name="ceWrap"`)
	case v.bold:
		w.s(` table:style-name="ceBold"`)
	}
	switch v.kind {
	case kNumber:
		n := num2s(v.num)
		w.s(` office:value-type="float" office:value="`, n, `"><text:p>`, n, `</text:p></table:table-cell>`)
	case kText:
		w.s(` office:value-type="string"><text:p>`)
		w.esc(v.text)
		w.s(`</text:p></table:table-cell>`)
	case kFormula:
		w.s(` table:formula="`)
		w.esc("of:=" + v.formula.ods())
		w.s(`"`)
		if v.rows > 1 || v.cols > 1 {
			w.s(` table:number-matrix-columns-spanned="`, strconv.Itoa(v.cols), `" table:number-matrix-rows-spanned="`, strconv.Itoa(v.rows), `"`)
		}
		w.s(`/>`)
	}
}

const odsStyles = xml.Header + `<office:document-styles xmlns:office="` + nsOffice + `" xmlns:style="` + nsStyle +
	`" xmlns:fo="` + nsFO + `" office:version="1.2"><office:styles><style:default-style style:family="table-cell">` +
	`<style:text-properties fo:font-size="10pt"/></style:default-style><style:style style:name="Default" style:family="table-cell"/>` +
	`</office:styles></office:document-styles>`

const odsMeta = xml.Header + `<office:document-meta xmlns:office="` + nsOffice + `" xmlns:meta="` + nsMeta + `" xmlns:dc="` + nsDC +
	`" office:version="1.2"><office:meta><meta:generator>veer examples/workbooks</meta:generator>` +
	`<dc:title>veer screening example (synthetic demo data)</dc:title></office:meta></office:document-meta>`

const odsManifest = xml.Header + `<manifest:manifest xmlns:manifest="` + nsManifest + `" manifest:version="1.2">` +
	`<manifest:file-entry manifest:full-path="/" manifest:version="1.2" manifest:media-type="` + odsMime + `"/>` +
	`<manifest:file-entry manifest:full-path="content.xml" manifest:media-type="text/xml"/>` +
	`<manifest:file-entry manifest:full-path="styles.xml" manifest:media-type="text/xml"/>` +
	`<manifest:file-entry manifest:full-path="meta.xml" manifest:media-type="text/xml"/>` +
	`</manifest:manifest>`

// writeODS writes the workbook as an OpenDocument spreadsheet.
func writeODS(wb *workbook) ([]byte, error) {
	var w odsWriter
	w.content(wb)
	var buf bytes.Buffer
	z := newDetZip(&buf, []string{"mimetype", "META-INF/manifest.xml", "content.xml", "styles.xml", "meta.xml"}, "mimetype")
	for _, p := range []struct {
		name string
		data []byte
	}{
		{"mimetype", []byte(odsMime)},
		{"META-INF/manifest.xml", []byte(odsManifest)},
		{"content.xml", w.b.Bytes()},
		{"styles.xml", []byte(odsStyles)},
		{"meta.xml", []byte(odsMeta)},
	} {
		pw, err := z.Create(p.name)
		if err != nil {
			return nil, err
		}
		if _, err := pw.Write(p.data); err != nil {
			return nil, err
		}
	}
	if err := z.Close(); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

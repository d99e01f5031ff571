package report

import (
	"bytes"
	"encoding/base64"
	"fmt"
	"html/template"
	"os"
	"path/filepath"
	"slices"
	"time"
)

// Report is a self-contained HTML page: the caution at the top, then
// sections of facts, tables and figures. Images are embedded as data URIs;
// there are no external scripts, style sheets or fonts, and a print style
// sheet keeps it legible on paper.
type Report struct {
	Title, Subtitle string
	Caution         string
	// Footnote is a note at the end (a basis report's reminder that maps
	// made with it are screening results, where no map is shown).
	Footnote string
	Created  string
	Sections []ReportSection
}

type ReportSection struct {
	Heading string
	Notes   []string
	Facts   [][2]string
	Tables  []ReportTable
	Figures []reportFigure
}

type ReportTable struct {
	Caption string
	Head    []string
	Rows    [][]string
}

type reportFigure struct {
	Caption string
	Src     template.URL
}

// PngFigure embeds PNG data as a figure.
func PngFigure(caption string, data []byte) reportFigure {
	return reportFigure{Caption: caption, Src: template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(data))}
}

var reportTemplate = template.Must(template.New("report").Parse(`<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
body { font-family: sans-serif; margin: 2em auto; max-width: 60em; padding: 0 1em; color: #222; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.2em; }
h2 { font-size: 1.25em; border-bottom: 1px solid #bbb; margin-top: 1.6em; }
.caution { border: 2px solid #b35900; background: #fff4e5; padding: 0.8em 1em; font-weight: bold; }
.sub { color: #555; }
table { border-collapse: collapse; margin: 0.8em 0; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.6em; text-align: right; }
th:first-child, td:first-child { text-align: left; }
caption { text-align: left; font-weight: bold; padding: 0.3em 0; }
dl { display: grid; grid-template-columns: max-content auto; gap: 0.2em 1em; }
dt { font-weight: bold; }
dd { margin: 0; }
figure { margin: 1em 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
figcaption { color: #555; font-size: 0.9em; }
@media print {
  body { margin: 0; max-width: none; font-size: 10pt; }
  .caution { background: none; }
  figure, table { break-inside: avoid; }
  h2 { break-after: avoid; }
}
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<p class="sub">{{.Subtitle}}</p>
{{if .Caution}}<p class="caution" id="caution">{{.Caution}}</p>{{end}}
{{range .Sections}}<section>
<h2>{{.Heading}}</h2>
{{range .Notes}}<p>{{.}}</p>
{{end}}{{if .Facts}}<dl>
{{range .Facts}}<dt>{{index . 0}}</dt><dd>{{index . 1}}</dd>
{{end}}</dl>
{{end}}{{range .Tables}}<table>
<caption>{{.Caption}}</caption>
<thead><tr>{{range .Head}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>
{{range .Rows}}<tr>{{range .}}<td>{{.}}</td>{{end}}</tr>
{{end}}</tbody>
</table>
{{end}}{{range .Figures}}<figure>
<img src="{{.Src}}" alt="{{.Caption}}">
<figcaption>{{.Caption}}</figcaption>
</figure>
{{end}}</section>
{{end}}{{if .Footnote}}<p class="sub">{{.Footnote}}</p>
{{end}}<p class="sub">Written by bandfold {{.Created}}.</p>
</body>
</html>
`))

// Render executes the template.
func (r *Report) Render() ([]byte, error) {
	if r.Created == "" {
		r.Created = "on " + time.Now().UTC().Format("2006-01-02 15:04 UTC")
	}
	var buf bytes.Buffer
	if err := reportTemplate.Execute(&buf, r); err != nil {
		return nil, fmt.Errorf("report: %w", err)
	}
	return buf.Bytes(), nil
}

// Num formats a number for a report, or "n/a" for nil.
func Num(v *float64, decimals int) string {
	if v == nil {
		return "n/a"
	}
	return fmt.Sprintf("%.*f", decimals, *v)
}

type NamedImage struct {
	Name string
	Data []byte
}

// FolderImages reads the PNG figures of a change folder, by name.
func FolderImages(dir string) ([]NamedImage, error) {
	names, err := filepath.Glob(filepath.Join(dir, "*.png"))
	if err != nil {
		return nil, err
	}
	slices.Sort(names)
	var out []NamedImage
	for _, n := range names {
		data, err := os.ReadFile(n)
		if err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
		out = append(out, NamedImage{filepath.Base(n), data})
	}
	return out, nil
}

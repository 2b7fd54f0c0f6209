// Package web holds longwave's screens: html/template files parsed once at
// start-up from the binary, a typed struct per page, the echarts option
// values that the charts are drawn from, and the static files (our CSS, our
// chart and upload scripts, and echarts 5.4.3 itself) served from the binary
// under URLs that carry a hash of their content.
//
// No page holds inline script or inline style. Chart options reach the page
// as JSON data in a <script type="application/json"> element, which
// html/template writes through encoding/json (so <, > and & become \u003c,
// \u003e and \u0026 and the element cannot be closed from inside); our static
// script parses it and hands it to echarts.init/setOption.
package web

import (
	"bytes"
	"crypto/sha256"
	"embed"
	"encoding/hex"
	"errors"
	"fmt"
	"html/template"
	"io"
	"io/fs"
	"net/http"
	"path"
	"strings"
	"time"
)

//go:embed templates/*.html
var templateFS embed.FS

//go:embed static
var staticFS embed.FS

// StaticPrefix is the URL path under which the assets are served:
// /static/<hash>/<name>, hash being the first 16 hex digits of the file's
// SHA-256.
const StaticPrefix = "/static/"

// hashDigits is the length of the content hash in an asset URL (64 bits:
// collisions between versions of one file are not a concern).
const hashDigits = 16

// ErrUnknownPage is returned by Render for a page name with no template.
var ErrUnknownPage = errors.New("web: unknown page")

// Assets are the embedded static files with their content hashes.
type Assets struct {
	files map[string]asset // by name relative to static/, e.g. "longwave.css"
}

type asset struct {
	body []byte
	hash string
	mime string
}

// LoadAssets hashes every embedded static file.
func LoadAssets() (*Assets, error) {
	a := &Assets{files: map[string]asset{}}
	err := fs.WalkDir(staticFS, "static", func(p string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		body, err := staticFS.ReadFile(p)
		if err != nil {
			return err
		}
		sum := sha256.Sum256(body)
		name := strings.TrimPrefix(p, "static/")
		a.files[name] = asset{body: body, hash: hex.EncodeToString(sum[:])[:hashDigits], mime: mimeOf(name)}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("web: load assets: %w", err)
	}
	return a, nil
}

func mimeOf(name string) string {
	switch path.Ext(name) {
	case ".css":
		return "text/css; charset=utf-8"
	case ".js":
		return "text/javascript; charset=utf-8"
	case ".svg":
		return "image/svg+xml"
	case ".png":
		return "image/png"
	default:
		return "text/plain; charset=utf-8"
	}
}

// URL returns the hashed URL of an asset, e.g.
// "/static/0123456789abcdef/longwave.css". It returns "" for an unknown name
// (templates then fail their start-up check, see Parse).
func (a *Assets) URL(name string) string {
	f, ok := a.files[name]
	if !ok {
		return ""
	}
	return StaticPrefix + f.hash + "/" + name
}

// Names lists the asset names.
func (a *Assets) Names() []string {
	out := make([]string, 0, len(a.files))
	for n := range a.files {
		out = append(out, n)
	}
	return out
}

// Body returns an asset's content.
func (a *Assets) Body(name string) ([]byte, bool) {
	f, ok := a.files[name]
	return f.body, ok
}

// ServeAsset writes the asset named by hash and name (the two path parts
// after StaticPrefix), cached for a year since the URL changes with the
// content. It answers 404 for an unknown name or a stale hash.
func (a *Assets) ServeAsset(w http.ResponseWriter, r *http.Request, hash, name string) {
	f, ok := a.files[name]
	if !ok || f.hash != hash {
		http.NotFound(w, r)
		return
	}
	w.Header().Set("Content-Type", f.mime)
	w.Header().Set("Cache-Control", "public, max-age=31536000, immutable")
	http.ServeContent(w, r, "", time.Time{}, bytes.NewReader(f.body))
}

// Templates are the parsed page templates.
type Templates struct {
	set    *template.Template
	assets *Assets
}

// Parse parses every template once and checks that each asset it names
// exists. It is called at start-up; an error there is a build mistake.
func Parse(assets *Assets) (*Templates, error) {
	funcs := template.FuncMap{
		"asset": func(name string) (string, error) {
			u := assets.URL(name)
			if u == "" {
				return "", fmt.Errorf("web: no asset %q", name)
			}
			return u, nil
		},
	}
	set, err := template.New("").Funcs(funcs).ParseFS(templateFS, "templates/*.html")
	if err != nil {
		return nil, fmt.Errorf("web: parse templates: %w", err)
	}
	for _, name := range []string{"longwave.css", "charts.js", "traces.js", "upload.js", "echarts/echarts.min.js"} {
		if assets.URL(name) == "" {
			return nil, fmt.Errorf("web: asset %s missing", name)
		}
	}
	return &Templates{set: set, assets: assets}, nil
}

// Page is a screen's data; each page type names its template.
type Page interface {
	template() string
	frame() *Frame
}

// bodied is a page whose body was rendered beforehand (and cached): only
// its frame is rendered per request.
type bodied interface {
	body() template.HTML
}

func (p *CoursePage) body() template.HTML { return p.Body }
func (p *CohortPage) body() template.HTML { return p.Body }

// Render executes a page's template into a buffer and writes it to w only
// when the whole page rendered, so a template error never leaves half a
// page behind; the page goes out in one Write call. A page with a
// pre-rendered body has only its frame (the
// "top" and "bottom" templates) rendered, and the body is written as it is.
func (t *Templates) Render(w io.Writer, p Page) error {
	if b, ok := p.(bodied); ok {
		var top, bottom bytes.Buffer
		if err := t.set.ExecuteTemplate(&top, "top", p); err != nil {
			return fmt.Errorf("web: render %s: %w", p.template(), err)
		}
		if err := t.set.ExecuteTemplate(&bottom, "bottom", p); err != nil {
			return fmt.Errorf("web: render %s: %w", p.template(), err)
		}
		body := b.body()
		out := make([]byte, 0, top.Len()+len(body)+bottom.Len())
		out = append(append(append(out, top.Bytes()...), body...), bottom.Bytes()...)
		_, err := w.Write(out)
		return err
	}
	tpl := t.set.Lookup(p.template())
	if tpl == nil {
		return fmt.Errorf("%w: %s", ErrUnknownPage, p.template())
	}
	var buf bytes.Buffer
	if err := tpl.Execute(&buf, p); err != nil {
		return fmt.Errorf("web: render %s: %w", p.template(), err)
	}
	_, err := w.Write(buf.Bytes())
	return err
}

// RenderCourseBody renders the body of the course screen, to be framed by
// a CoursePage. The result is html/template output, safe to embed.
func (t *Templates) RenderCourseBody(b *CourseBody) (template.HTML, error) {
	return t.renderPart("course-body", b)
}

// RenderCohortBody renders the body of the cohort screen.
func (t *Templates) RenderCohortBody(b *CohortBody) (template.HTML, error) {
	return t.renderPart("cohort-body", b)
}

func (t *Templates) renderPart(name string, data any) (template.HTML, error) {
	var buf bytes.Buffer
	if err := t.set.ExecuteTemplate(&buf, name, data); err != nil {
		return "", fmt.Errorf("web: render %s: %w", name, err)
	}
	return template.HTML(buf.String()), nil // #nosec: produced by html/template, escaped in context
}

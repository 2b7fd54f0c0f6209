package server

import (
	"bytes"
	"context"
	"encoding/json"
	"io/fs"
	"mime/multipart"
	"net/http"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"longwave/ingest"
	"longwave/ingest/synth"
)

// multipartBody builds the Add recording form: csrf first (as the page's
// form orders it), then the fields and the file.
func multipartBody(t *testing.T, csrf, code, date, fileName string, data []byte) (*bytes.Buffer, string) {
	t.Helper()
	var b bytes.Buffer
	mw := multipart.NewWriter(&b)
	if csrf != "" {
		mw.WriteField("csrf", csrf)
	}
	mw.WriteField("patient", code)
	mw.WriteField("date", date)
	mw.WriteField("state", "")
	mw.WriteField("birth_year", "1949")
	mw.WriteField("sex", "M")
	fw, err := mw.CreateFormFile("file", fileName)
	if err != nil {
		t.Fatal(err)
	}
	fw.Write(data)
	mw.Close()
	return &b, mw.FormDataContentType()
}

var problemRE = regexp.MustCompile(`<p class="problem" role="alert">(.*?)</p>`)

func synthRecording(t *testing.T, seed uint64) []byte {
	t.Helper()
	s := synth.Default()
	s.Seed = seed
	s.Duration = 120
	s.Periods = []ingest.Period{{State: ingest.EyesClosed, Start: 0, End: 80}, {State: ingest.EyesOpen, Start: 80, End: 120}}
	b, err := synth.Bytes(s)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// countFiles counts regular files under dir (0 when it does not exist).
func countFiles(t *testing.T, dir string) int {
	t.Helper()
	n := 0
	filepath.WalkDir(dir, func(_ string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() {
			n++
		}
		return nil
	})
	return n
}

// TestUploadGoodFile uploads as the page's script does (header token, JSON
// answer), then finds the visit on the course; the uploaded name never
// becomes a path and no temporary file is left.
func TestUploadGoodFile(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	e := newEnv(t, "", Config{})
	c := e.signedIn(clinicianName)
	body, ct := multipartBody(t, "", "LW-0202", "2025-05-20", "../../etc/passwd <b>.edf", synthRecording(t, 31))
	req, _ := http.NewRequest(http.MethodPost, c.base+"/add", body)
	req.Header.Set("Content-Type", ct)
	req.Header.Set(csrfHeader, c.csrf)
	req.Header.Set("Accept", "application/json")
	status, text, _ := c.do(req)
	if status != http.StatusOK {
		t.Fatalf("upload: status %d: %s", status, text)
	}
	var ans uploadAnswer
	if err := json.Unmarshal([]byte(text), &ans); err != nil || ans.VisitID == 0 {
		t.Fatalf("upload answer %q: %v", text, err)
	}
	if strings.Contains(ans.Message, "/") || strings.Contains(ans.Message, "<") {
		t.Errorf("message names the raw upload name: %q", ans.Message)
	}
	status, page, _ := c.get(courseURL("LW-0202"))
	if status != http.StatusOK || !strings.Contains(page, "2025-05-20") || !strings.Contains(page, ans.VisitURL) {
		t.Errorf("course after upload: status %d, visit %s listed: %v", status, ans.VisitURL, strings.Contains(page, ans.VisitURL))
	}
	if p, err := e.st.PatientByCode(context.Background(), "LW-0202"); err != nil || p.BirthYear != 1949 || p.Sex != "M" {
		t.Errorf("new patient from the form: %+v, %v; want born 1949, sex M", p, err)
	}
	// The data folder holds the recording under its hash only.
	filepath.WalkDir(e.st.DataDir(), func(p string, d fs.DirEntry, err error) error {
		if err == nil && !d.IsDir() && (strings.Contains(p, "passwd") || strings.Contains(p, "<")) {
			t.Errorf("stored file named after the upload: %s", p)
		}
		return nil
	})
	if n := countFiles(t, e.st.DataDir()); n != 1 {
		t.Errorf("data folder holds %d files, want 1", n)
	}
	if n := countFiles(t, tmp); n != 0 {
		t.Errorf("%d temporary files left behind", n)
	}
	// The same file again is recognised by its hash.
	body, ct = multipartBody(t, c.csrf, "LW-0202", "2025-05-21", "again.edf", synthRecording(t, 31))
	req, _ = http.NewRequest(http.MethodPost, c.base+"/add", body)
	req.Header.Set("Content-Type", ct)
	status, text, _ = c.do(req)
	if status != http.StatusOK || !strings.Contains(text, "already") {
		t.Errorf("same file twice (plain form post): status %d, page mentions it: %v", status, strings.Contains(text, "already"))
	}
	log, _ := e.st.AuditLog(context.Background(), 10)
	ingests := 0
	for _, a := range log {
		if a.Action == "ingest" {
			ingests++
		}
	}
	if ingests != 2 {
		t.Errorf("%d ingest audit entries, want 2", ingests)
	}
}

// TestUploadBadFile: a file the decoder refuses shows its error (file name,
// field, offset) on the page, and leaves no row, no stored file and no
// temporary file.
func TestUploadBadFile(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	e := newEnv(t, "", Config{})
	c := e.signedIn(clinicianName)
	good := synthRecording(t, 41)
	bad := append([]byte(nil), good...)
	copy(bad[252:256], "9999") // number of signals: the header no longer fits
	for _, tc := range []struct {
		name string
		data []byte
		want string
	}{
		{"broken.edf", bad, "broken.edf"},
		{"notes.edf", []byte("this is not a recording at all, only words"), "notes.edf"},
	} {
		body, ct := multipartBody(t, c.csrf, "LW-0303", "2025-05-20", tc.name, tc.data)
		req, _ := http.NewRequest(http.MethodPost, c.base+"/add", body)
		req.Header.Set("Content-Type", ct)
		status, page, _ := c.do(req)
		if status != http.StatusUnprocessableEntity {
			t.Errorf("%s: status %d, want 422", tc.name, status)
		}
		if m := problemRE.FindStringSubmatch(page); m != nil {
			t.Logf("%s: the page says: %s", tc.name, m[1])
		}
		if !strings.Contains(page, tc.want) || !strings.Contains(page, `role="alert"`) {
			t.Errorf("%s: page does not show the error naming the file", tc.name)
		}
		for _, leak := range []string{tmp, "SELECT", "INSERT", "longwave-upload-", "sqlite"} {
			if strings.Contains(page, leak) {
				t.Errorf("%s: page leaks %q", tc.name, leak)
			}
		}
	}
	pats, err := e.st.Patients(context.Background())
	if err != nil || len(pats) != 0 {
		t.Errorf("patients after bad uploads: %d, %v; want none", len(pats), err)
	}
	if n := countFiles(t, e.st.DataDir()); n != 0 {
		t.Errorf("data folder holds %d files after bad uploads", n)
	}
	if n := countFiles(t, tmp); n != 0 {
		t.Errorf("%d temporary files left behind", n)
	}
}

// TestUploadTooLarge: beyond the limit the answer is 413 with a clear
// message, as JSON for the script and as the page for a form post.
func TestUploadTooLarge(t *testing.T) {
	tmp := t.TempDir()
	t.Setenv("TMPDIR", tmp)
	e := newEnv(t, "", Config{UploadLimit: 64 << 10})
	c := e.signedIn(adminName)
	big := bytes.Repeat([]byte("0"), 200<<10)
	for _, asJSON := range []bool{true, false} {
		body, ct := multipartBody(t, c.csrf, "LW-0404", "2025-05-20", "big.edf", big)
		req, _ := http.NewRequest(http.MethodPost, c.base+"/add", body)
		req.Header.Set("Content-Type", ct)
		if asJSON {
			req.Header.Set("Accept", "application/json")
		}
		status, text, _ := c.do(req)
		if status != http.StatusRequestEntityTooLarge {
			t.Errorf("json=%v: status %d, want 413", asJSON, status)
		}
		if !strings.Contains(text, "larger than the limit of 64 KiB") {
			t.Errorf("json=%v: answer lacks the limit: %q", asJSON, text[:min(300, len(text))])
		}
		if asJSON && !strings.HasPrefix(text, `{"error":`) {
			t.Errorf("413 JSON answer %q", text)
		}
	}
	if n := countFiles(t, tmp); n != 0 {
		t.Errorf("%d temporary files left behind", n)
	}
	if n := countFiles(t, e.st.DataDir()); n != 0 {
		t.Errorf("data folder holds %d files", n)
	}
}

func TestCleanFileName(t *testing.T) {
	for _, tc := range []struct{ in, want string }{
		{"rec.edf", "rec.edf"},
		{"../../etc/passwd", "passwd"},
		{`C:\clinic\Patient Name.edf`, "Patient_Name.edf"},
		{"<script>.edf", "_script_.edf"},
		{"..", "upload"},
		{"", "upload"},
		{strings.Repeat("a", 200), strings.Repeat("a", 80)},
	} {
		if got := cleanFileName(tc.in); got != tc.want {
			t.Errorf("cleanFileName(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
}

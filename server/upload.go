package server

import (
	"errors"
	"fmt"
	"io"
	"mime/multipart"
	"net/http"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"longwave/ingest"
	"longwave/server/intake"
	"longwave/server/store"
	"longwave/web"
)

// fieldLimit bounds each text field of the upload form.
const fieldLimit = 4 << 10

// sexes offered on the form (store.Patient.Sex).
var sexes = []web.Pair{
	{Label: "not given", Value: ""},
	{Label: "female", Value: "F"},
	{Label: "male", Value: "M"},
	{Label: "other", Value: "O"},
}

// eyeStates offered on the form for a file that does not say.
var eyeStates = []web.Pair{
	{Label: "from the file (annotations)", Value: ""},
	{Label: "eyes closed throughout", Value: string(ingest.EyesClosed)},
	{Label: "eyes open throughout", Value: string(ingest.EyesOpen)},
}

// uploadForm shows the Add recording form.
func (s *Server) uploadForm(w http.ResponseWriter, r *http.Request) {
	page, err := s.uploadPage(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page.Code = r.URL.Query().Get("patient")
	if len(page.Code) > store.MaxCodeLength {
		page.Code = ""
	}
	page.Date = s.now().Format(time.DateOnly)
	s.render(w, r, http.StatusOK, page)
}

func (s *Server) uploadPage(r *http.Request) (*web.UploadPage, error) {
	list, err := s.st.Patients(r.Context())
	if err != nil {
		return nil, err
	}
	page := &web.UploadPage{Frame: s.frame(r, "Add recording", "/add"), Limit: sizeText(s.cfg.UploadLimit),
		LimitBytes: s.cfg.UploadLimit, States: eyeStates, Sexes: sexes}
	for _, p := range list {
		page.Patients = append(page.Patients, p.Code)
	}
	return page, nil
}

func sizeText(n int64) string {
	switch {
	case n >= 1<<20:
		return decimals(float64(n)/(1<<20), 1) + " MiB"
	case n >= 1<<10:
		return decimals(float64(n)/(1<<10), 1) + " KiB"
	default:
		return fmt.Sprintf("%d bytes", n)
	}
}

// uploadAnswer is the JSON answer to the upload script.
type uploadAnswer struct {
	Message   string        `json:"message"`
	VisitID   int64         `json:"visit_id,omitempty"`
	VisitURL  string        `json:"visit_url,omitempty"`
	CourseURL string        `json:"course_url,omitempty"`
	Flags     []flagJSON    `json:"flags"`
	Skipped   bool          `json:"skipped"`
	Timing    *uploadTiming `json:"timing,omitempty"`
}

type flagJSON struct {
	Severity string `json:"severity"`
	Reason   string `json:"reason"`
}

type uploadTiming struct {
	DecodeMS, ComputeMS, StoreMS int64
}

// uploadForm is what the multipart body said.
type uploadFields struct {
	code, date, state string
	birthYear         int
	birthText, sex    string
	fileName          string // cleaned, for messages only
	tmp               string // temporary file holding the upload
}

// upload receives one recording for a patient's visit: the body is limited
// to Config.UploadLimit (413 beyond), the file is streamed to a temporary
// file (never named after the upload), run through the intake pipeline (one
// transaction) and removed. A script request gets JSON; a plain form post
// gets the page with the result or the error.
func (s *Server) upload(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, s.cfg.UploadLimit)
	f, err := s.readUpload(r)
	if f.tmp != "" {
		defer os.Remove(f.tmp)
	}
	if err != nil {
		s.uploadFailed(w, r, f, err)
		return
	}
	req := intake.Request{PatientCode: f.code, Date: f.date, DeclaredState: ingest.EyeState(f.state),
		BirthYear: f.birthYear, Sex: f.sex,
		Single: &intake.File{Path: f.tmp, Name: f.fileName}}
	out, err := s.pipe.IngestVisit(r.Context(), req)
	if err != nil {
		s.uploadFailed(w, r, f, err)
		return
	}
	s.cohort.drop()
	s.bodies.drop()
	subject := f.code + " " + f.date
	if out.Skipped {
		subject += " (already stored)"
	}
	if err := s.audit(r, store.AuditIngest, subject); err != nil {
		s.fail(w, r, err)
		return
	}
	ans := uploadAnswer{Message: out.Message, Skipped: out.Skipped, CourseURL: courseURL(f.code), Flags: []flagJSON{}}
	if ans.Message == "" {
		ans.Message = "Recording " + f.fileName + " added to " + f.code + ", visit of " + f.date + "."
	}
	if out.VisitID > 0 {
		ans.VisitID, ans.VisitURL = out.VisitID, visitURL(out.VisitID)
	}
	for _, fl := range out.Flags {
		ans.Flags = append(ans.Flags, flagJSON{Severity: flagView(fl).Severity, Reason: peopleText(fl.Reason)})
	}
	ans.Timing = &uploadTiming{DecodeMS: out.DecodeTime.Milliseconds(), ComputeMS: out.ComputeTime.Milliseconds(), StoreMS: out.StoreTime.Milliseconds()}
	if wantsJSON(r) {
		writeJSON(w, http.StatusOK, ans)
		return
	}
	page, err := s.uploadPage(r)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page.Code, page.Date, page.State, page.BirthYear, page.Sex = f.code, f.date, f.state, f.birthText, f.sex
	page.Result = &web.UploadResult{Message: ans.Message, VisitURL: ans.VisitURL, CourseURL: ans.CourseURL, Flags: flagViews(out.Flags)}
	s.render(w, r, http.StatusOK, page)
}

// readUpload reads the form fields and streams the file part to a
// temporary file. A multipart post without the CSRF header must carry the
// token as its first part.
func (s *Server) readUpload(r *http.Request) (uploadFields, error) {
	var f uploadFields
	mr, err := r.MultipartReader()
	if err != nil {
		return f, problem(http.StatusBadRequest, "the upload must be a multipart form with a file")
	}
	first := true
	for {
		part, err := mr.NextPart()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			return f, bodyError(err)
		}
		name := part.FormName()
		if first && csrfPending(r) {
			sess, _ := sessionFrom(r.Context())
			v, err := readField(part)
			if err != nil {
				return f, err
			}
			if name != csrfField || !sameToken(v, sess.CSRF) {
				return f, errBadCSRF
			}
			first = false
			continue
		}
		first = false
		switch name {
		case "patient":
			if f.code, err = readField(part); err != nil {
				return f, err
			}
			f.code = strings.TrimSpace(f.code)
		case "date":
			if f.date, err = readField(part); err != nil {
				return f, err
			}
		case "state":
			if f.state, err = readField(part); err != nil {
				return f, err
			}
		case "birth_year":
			if f.birthText, err = readField(part); err != nil {
				return f, err
			}
			f.birthText = strings.TrimSpace(f.birthText)
		case "sex":
			if f.sex, err = readField(part); err != nil {
				return f, err
			}
		case "file":
			if f.tmp != "" {
				return f, problem(http.StatusBadRequest, "send one file per upload")
			}
			f.fileName = cleanFileName(part.FileName())
			if f.tmp, err = spool(part); err != nil {
				return f, err
			}
		default:
			if _, err := io.Copy(io.Discard, io.LimitReader(part, fieldLimit)); err != nil {
				return f, bodyError(err)
			}
		}
	}
	if csrfPending(r) && first {
		return f, errBadCSRF
	}
	switch {
	case f.code == "":
		return f, problem(http.StatusBadRequest, "give the patient code")
	case len(f.code) > store.MaxCodeLength:
		return f, problem(http.StatusBadRequest, fmt.Sprintf("the patient code is longer than %d characters", store.MaxCodeLength))
	case f.tmp == "":
		return f, problem(http.StatusBadRequest, "choose a recording file")
	}
	if _, err := time.Parse(time.DateOnly, f.date); err != nil {
		return f, problem(http.StatusBadRequest, "the visit date must be a date as YYYY-MM-DD")
	}
	if f.state != "" && f.state != string(ingest.EyesClosed) && f.state != string(ingest.EyesOpen) {
		return f, problem(http.StatusBadRequest, "the eye state must be closed, open or left to the file")
	}
	if f.birthText != "" {
		y, err := strconv.Atoi(f.birthText)
		if err != nil || y < 1880 || y > 2200 {
			return f, problem(http.StatusBadRequest, "the birth year must be a four-digit year from 1880")
		}
		f.birthYear = y
	}
	if f.sex != "" && f.sex != "F" && f.sex != "M" && f.sex != "O" {
		return f, problem(http.StatusBadRequest, "sex must be female, male, other or not given")
	}
	return f, nil
}

func readField(p *multipart.Part) (string, error) {
	b, err := io.ReadAll(io.LimitReader(p, fieldLimit+1))
	if err != nil {
		return "", bodyError(err)
	}
	if len(b) > fieldLimit {
		return "", problem(http.StatusBadRequest, "a form field is too long")
	}
	return string(b), nil
}

// spool copies a file part to a new temporary file and returns its path.
// The file's name is random (os.CreateTemp); the uploaded name never
// becomes part of a path.
func spool(p *multipart.Part) (string, error) {
	tmp, err := os.CreateTemp("", "longwave-upload-*")
	if err != nil {
		return "", fmt.Errorf("server: upload: temporary file: %w", err)
	}
	_, cerr := io.Copy(tmp, p)
	err = tmp.Close()
	if cerr != nil {
		os.Remove(tmp.Name())
		return "", bodyError(cerr)
	}
	if err != nil {
		os.Remove(tmp.Name())
		return "", fmt.Errorf("server: upload: temporary file: %w", err)
	}
	return tmp.Name(), nil
}

// bodyError turns a body read error into 413 beyond the limit, else 400.
func bodyError(err error) error {
	var mb *http.MaxBytesError
	if errors.As(err, &mb) {
		return &appError{status: http.StatusRequestEntityTooLarge,
			msg: fmt.Sprintf("the upload is larger than the limit of %s; nothing was stored", sizeText(mb.Limit))}
	}
	return &appError{status: http.StatusBadRequest, msg: "the upload could not be read to the end; nothing was stored", cause: err}
}

// cleanFileName keeps the base name of an uploaded file for messages: at
// most 80 of the characters A–Z a–z 0–9 . _ - (others become _).
func cleanFileName(name string) string {
	if i := strings.LastIndexAny(name, `/\`); i >= 0 {
		name = name[i+1:]
	}
	var b strings.Builder
	for _, c := range name {
		if b.Len() >= 80 {
			break
		}
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '.', c == '_', c == '-':
			b.WriteRune(c)
		default:
			b.WriteByte('_')
		}
	}
	if b.Len() == 0 || strings.Trim(b.String(), ".") == "" {
		return "upload"
	}
	return b.String()
}

// uploadError turns an ingest error into words for the page: decoder and
// request errors are written for people (file name, field, offset); a
// visit on the same date says so; anything else is internal.
//
// The decoder names a file by the base name of its path, which for an
// upload is the random temporary name; named is the text with that name
// replaced by the uploaded file's cleaned name.
func uploadError(err error, f uploadFields) error {
	named := func(s string) string {
		if f.tmp == "" {
			return s
		}
		return strings.ReplaceAll(s, filepath.Base(f.tmp), f.fileName)
	}
	var ae *appError
	var fe *ingest.FormatError
	switch {
	case errors.As(err, &ae):
		return err
	case errors.As(err, &fe):
		return &appError{status: http.StatusUnprocessableEntity, msg: "the recording could not be read, nothing was stored: " + named(fe.Error())}
	case errors.Is(err, ingest.ErrInvalid), errors.Is(err, ingest.ErrUnsupported), errors.Is(err, intake.ErrRequest):
		return &appError{status: http.StatusUnprocessableEntity, msg: "nothing was stored: " + named(err.Error())}
	case errors.Is(err, store.ErrVisitExists):
		return &appError{status: http.StatusConflict, msg: "this patient already has a visit on that date; nothing was stored", cause: err}
	case errors.Is(err, store.ErrInvalid):
		return &appError{status: http.StatusUnprocessableEntity, msg: "nothing was stored: " + strings.TrimPrefix(err.Error(), "store: invalid value: ")}
	default:
		return err
	}
}

// uploadFailed answers a failed upload: JSON for the script, else the
// form again with the error; an internal error goes to the error exit.
func (s *Server) uploadFailed(w http.ResponseWriter, r *http.Request, f uploadFields, err error) {
	err = uploadError(err, f)
	var ae *appError
	if !errors.As(err, &ae) || ae.status == http.StatusForbidden {
		s.fail(w, r, err)
		return
	}
	if aerr := s.audit(r, store.AuditIngestFailed, f.code+" "+f.date+" "+f.fileName); aerr != nil {
		s.fail(w, r, aerr)
		return
	}
	if wantsJSON(r) {
		s.fail(w, r, err)
		return
	}
	page, perr := s.uploadPage(r)
	if perr != nil {
		s.fail(w, r, perr)
		return
	}
	page.Code, page.Date, page.State, page.BirthYear, page.Sex, page.Error = f.code, f.date, f.state, f.birthText, f.sex, ae.msg
	s.render(w, r, ae.status, page)
}

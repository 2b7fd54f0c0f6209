package web

import "html/template"

// One struct per screen. Every value a template prints is already a string
// formatted for people (dates ISO 8601, numbers with their unit), so the
// templates hold no logic beyond loops and conditions, and html/template
// escapes everything that came from a recording or a user.

// Frame is what every page shares: the title, the signed-in user, the CSRF
// token for its forms and the links of the top bar.
type Frame struct {
	Title string
	User  string
	Role  string
	CSRF  string
	Nav   []NavLink
}

func (f *Frame) frame() *Frame { return f }

// NavLink is one link of the top bar.
type NavLink struct {
	Label   string
	URL     string
	Current bool
}

// Cell is a number with its unit for a right-aligned table cell; Text is
// "–" with Note saying why when there is no number.
type Cell struct {
	Text string
	Unit string
	Note string
}

// Pair is a labelled value of a definition list (conditions, settings).
type Pair struct {
	Label string
	Value string
}

// FlagView is a visit flag as shown: severity in words, reason, source and
// the markers affected ("all markers" when the flag names none).
type FlagView struct {
	Severity    string // "not comparable" or "caution"
	SeverityKey string // "not_comparable" or "caution", for the CSS class
	Reason      string
	Source      string
	Markers     string
}

// ChartBox is a chart's place on a page: the key of its option in the
// page's ChartData, a title, and text under it.
type ChartBox struct {
	Key     string
	Title   string
	Caption string
	Tall    bool
}

// SignInPage is the sign-in form.
type SignInPage struct {
	Frame
	Name  string
	Next  string
	Error string
	// FormToken is the pre-session CSRF token (also in a cookie).
	FormToken string
}

func (*SignInPage) template() string { return "signin.html" }

// PatientsPage lists every patient for a clinician to open.
type PatientsPage struct {
	Frame
	Rows   []PatientRow
	AddURL string // "" when the user may not add recordings
}

func (*PatientsPage) template() string { return "patients.html" }

// PatientRow is one patient of the list.
type PatientRow struct {
	Code      string
	URL       string
	Sex       string
	BirthYear string
	Cohort    string
	Visits    Cell
	LastVisit string
}

// CohortPage is the follow-up table framed for one user; Body is a
// CohortBody rendered once by RenderCohortBody (it is the same for every
// user and is cached).
type CohortPage struct {
	Frame
	Body template.HTML
}

func (*CohortPage) template() string { return "cohort.html" }

// CohortBody is the follow-up table of a cohort, one row per patient.
type CohortBody struct {
	Overdue, Flagged, Reliable bool
	Sort                       string
	SortOptions                []Pair // Label: shown, Value: key
	// Verdict is the verdict filter's value ("" for all), Verdicts its
	// choices; VerdictOf names the marker the verdict column judges.
	Verdict          string
	Verdicts         []Pair
	VerdictOf        string
	VerdictShort     string // the same marker's name for a column head
	Markers          []string
	Rows             []CohortRow
	Total            int
	PageText         string
	PrevURL, NextURL string
	CSVURL           string
}

// CohortRow is one patient's follow-up.
type CohortRow struct {
	Code        string
	URL         string
	Visits      Cell
	Comparable  Cell
	LastVisit   string
	NextDue     string
	OverdueDays Cell
	Overdue     bool
	Flags       []string
	Directions  []Direction
	// Spark is the small line of the first main marker's comparable
	// values (nil without any).
	Spark *Spark
	// Verdict is the first main marker against the clinic's controls in
	// words, VerdictKey its CSS class suffix ("down", "up", "steady",
	// "none"), VerdictWhy the reason when there is none; Concern when the
	// change goes the way that worries.
	Verdict    string
	VerdictKey string
	VerdictWhy string
	Concern    bool
}

// Spark is a small inline SVG line: its points in SVG user units, the
// latest point and a text alternative.
type Spark struct {
	Points, LastX, LastY, Label, Width, Height string
}

// Direction is a marker's change over the patient's comparable visits in
// words ("lower", "higher", "no clear change", "–").
type Direction struct {
	Marker   string
	Text     string
	Key      string // CSS class suffix: "down", "up", "steady", "none"
	Reliable bool
}

// CoursePage is a patient's course framed for one user; Body is a
// CourseBody rendered once by RenderCourseBody (cached).
type CoursePage struct {
	Frame
	Body template.HTML
}

func (*CoursePage) template() string { return "course.html" }

// CourseBody is one patient's course: the overview (headline markers, the
// strip of visits, the next due date, every visit's spectrum), the other
// markers in closed groups, the visits and the page's notes.
type CourseBody struct {
	Code       string
	Facts      []Pair
	AddURL     string
	SummaryURL string
	Headline   []HeadlineCard
	// NoVerdict says once why no headline marker has a verdict ("" when
	// some have one, or the reasons differ).
	NoVerdict string
	Strip     []VisitChip
	NextDue   string
	Overdue   bool
	Overlay   *OverlayBox
	Groups    []ChartGroup
	Visits    []VisitRow
	// Notes are the explanations that would repeat under several charts,
	// each shown once; the charts say "see note N".
	Notes     []Note
	ChartData map[string]Option
	Advisory  string
}

// HeadlineCard is one headline marker of the overview: a small chart, its
// change in words (Verdict, against the clinic's controls when Known), the
// figures in a few lines, and every figure behind a closed details.
type HeadlineCard struct {
	Title   string
	Where   string // region and state in words
	Missing string // why there is no chart ("" when there is one)
	Chart   CourseChart
	Verdict string
	Known   bool
	Concern bool
	Lines   []string
}

// VisitChip is one visit in the overview's strip.
type VisitChip struct {
	Date       string
	URL        string
	Comparable bool
	Status     string // "comparable", "not comparable", …
	Why        string // the first reason in a few words, "" when none
}

// OverlayBox is the chart of every visit's spectrum: its key, the counts of
// comparable and other visits (the switch shows the latter), and each
// comparable visit's peak frequency.
type OverlayBox struct {
	Key        string
	Comparable int
	Apart      int
	Peaks      []Pair
}

// ChartGroup is a closed group of charts below the overview.
type ChartGroup struct {
	Title  string
	Intro  string
	Charts []CourseChart
}

// Note is an explanation shown once per page.
type Note struct {
	N    int
	Text string
}

// CourseChart is one marker's chart with its change figures and the
// reference band's source.
type CourseChart struct {
	ChartBox
	Figures []Pair
	// Reference is the citation of the band drawn, or the reason none is.
	Reference string
	HasBand   bool
	Status    string
	// Norm is the marker against the clinic's controls (nil: not shown).
	Norm *NormView
}

// NormView is a marker's course against the clinic's control norm: the
// verdict in words, the figures behind it, the basis, and the published
// ageing notes beside it, all advisory.
type NormView struct {
	// Verdict is the sentence for people; Known false when it says why
	// there is none; Concern when the change goes the way that worries.
	Verdict string
	Known   bool
	Concern bool
	Figures []Pair
	Basis   string
	Note    string
	// Advisory is shown under the verdict.
	Advisory   string
	Literature []LiteratureView
}

// LiteratureView is one published ageing note as shown.
type LiteratureView struct {
	Text    string
	PerYear string // "" when the note gives no rate
	Source  string
}

// VisitRow is one visit in the course's table.
type VisitRow struct {
	Date       string
	Age        string
	URL        string
	Comparable bool
	Verdict    string
	Conditions []Pair
	Flags      []FlagView
}

// VisitPage is one visit: spectra, traces, conditions, flags.
type VisitPage struct {
	Frame
	Code       string
	CourseURL  string
	Date       string
	Age        string
	Verdict    string
	Comparable bool
	Settings   []Pair
	Conditions []Pair
	Flags      []FlagView
	Markers    []MarkerRow
	// HasIntervals is true when any marker carries its own interval
	// (settings v2 onward); NoIntervals says why none do.
	HasIntervals bool
	NoIntervals  string
	Spectra      []ChartBox
	Traces       *TraceViewer
	NoDisplay    string
	ChartData    map[string]Option
}

func (*VisitPage) template() string { return "visit.html" }

// TraceViewer is the visit's whole recording, page by page (the
// "traces" partial and static/traces.js): where its pages come from, the
// chart frame built with go-echarts, the viewer's colours and the row
// heights offered. It reaches the page as JSON data.
type TraceViewer struct {
	Source   string        `json:"source"`   // the traces API of the visit
	Duration string        `json:"-"`        // "150 s", for people
	Seconds  float64       `json:"duration"` // the recording's length, s
	Unshaded string        `json:"-"`        // what lies in no window, for people
	Frame    Option        `json:"frame"`
	Colours  TraceColours  `json:"colours"`
	Heights  []float64     `json:"heights"` // µV per row
	Montages []TraceChoice `json:"-"`
	Signals  []TraceChoice `json:"-"`
}

// TraceColours are the viewer's colours (chart.go).
type TraceColours struct {
	Trace, Bad, Kept, Rejected, Edge, Closed, Open, Scale, Axis string
}

// TraceChoice is one option of a viewer control.
type TraceChoice struct {
	Value, Label string
}

// MarkerRow is one marker of a visit.
type MarkerRow struct {
	Name   string
	Region string
	State  string
	Value  Cell
	// Interval is the value's interval in words ("9.19 to 9.43 Hz", "" when
	// it has none) and Method how it was made, in words.
	Interval string
	Method   string
}

// UploadPage is the form to add a recording to a patient's visit, and its
// result after a plain (script-less) post.
type UploadPage struct {
	Frame
	Code       string
	Date       string
	Limit      string
	LimitBytes int64
	Patients   []string
	States     []Pair
	State      string
	BirthYear  string
	Sex        string
	Sexes      []Pair
	Result     *UploadResult
	Error      string
}

func (*UploadPage) template() string { return "upload.html" }

// UploadResult says what became of an upload.
type UploadResult struct {
	Message   string
	VisitURL  string
	CourseURL string
	Flags     []FlagView
}

// SourcesPage lists every reference range with its citation and status.
type SourcesPage struct {
	Frame
	Advisory string
	Rows     []SourceRow
}

func (*SourcesPage) template() string { return "sources.html" }

// SourceRow is one reference range.
type SourceRow struct {
	Set      string
	Marker   string
	Region   string
	State    string
	Ages     string
	Range    string
	Change   string
	Citation string
	Status   string
	Method   string
	Note     string
}

// UsersPage is the admin's list of users with a form to add one and, per
// user, forms to disable or enable the account and reset its password.
type UsersPage struct {
	Frame
	Users  []UserRow
	Roles  []string
	Error  string
	Notice string
	// Reset is the password just generated by a reset, shown once.
	Reset *ShownPassword
	// The password lengths, in characters, for the add form's hint.
	MinPassword, MinAdminPassword, MaxPassword int
	// PasswordURL is the screen where the admin changes their own password.
	PasswordURL string
	Audit       []AuditRow
}

func (*UsersPage) template() string { return "users.html" }

// UserRow is one user with the addresses of its row's forms.
type UserRow struct {
	Name     string
	Role     string
	Created  string
	Disabled bool
	// Self is the signed-in admin's own row: no disable or reset form.
	Self bool
	// ToggleURL and ToggleLabel are the disable (or enable) form's.
	ToggleURL, ToggleLabel string
	ResetURL               string
}

// ShownPassword is a generated password shown once, with its user.
type ShownPassword struct {
	User, Password string
}

// PasswordPage is where a signed-in user changes their own password.
type PasswordPage struct {
	Frame
	Error, Notice        string
	MinLength, MaxLength int
	Admin                bool
}

func (*PasswordPage) template() string { return "password.html" }

// AuditRow is one audit entry, or Times equal consecutive entries of which
// the newest was at At and the oldest at First.
type AuditRow struct {
	At, User, Action, Subject, Client string
	Times                             int
	First                             string
}

// ErrorPage tells a person what went wrong in words meant for them.
type ErrorPage struct {
	Frame
	Status  int
	Message string
}

func (*ErrorPage) template() string { return "error.html" }

// SummaryPage is the one-page summary of a patient for the clinic letter,
// laid out for printing on A4.
type SummaryPage struct {
	Frame
	Code      string
	CourseURL string
	Printed   string
	Facts     []Pair
	Rows      []SummaryRow
	Overlay   *OverlayBox
	Flags     []SummaryFlag
	Settings  string
	Basis     string
	NoVerdict string // the one reason when no headline marker has a verdict
	Advisory  string
	Verdicts  string // the advisory of the verdicts against the controls
	ChartData map[string]Option
}

func (*SummaryPage) template() string { return "summary.html" }

// SummaryRow is one headline marker of the summary.
type SummaryRow struct {
	Marker, Where string
	// Values are the first and latest comparable values ("9.47 → 8.01 Hz")
	// and Dates their dates.
	Values, Dates   string
	Slope, Interval string
	Verdict, Basis  string
	Concern         bool
}

// SummaryFlag is one flag of a visit in words.
type SummaryFlag struct {
	Date, Severity, SeverityKey, Text, Markers string
}

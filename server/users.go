package server

import (
	"errors"
	"net/http"
	"net/url"
	"strings"
	"time"

	"longwave/server/store"
	"longwave/web"
)

// The admin's users screen: every account with its state, a form to add
// one, and per account the changes of its lifetime (disable, enable, reset
// the password), each a small form with the session's CSRF token. Every
// change is audited by the store in the change's own transaction, with the
// admin as the actor. An admin changes their own password on the password
// screen, not here, and cannot disable their own account here (another
// admin or the command line can), so the screen cannot lock its own user out.

// userActionURL is the address a row's form posts to.
func userActionURL(name, action string) string {
	return "/users/" + url.PathEscape(name) + "/" + action
}

// usersPage lists the users and the latest audit entries (admin only).
func (s *Server) usersPage(w http.ResponseWriter, r *http.Request) {
	s.renderUsers(w, r, http.StatusOK, usersOutcome{})
}

// usersOutcome is what a change on the users screen says back.
type usersOutcome struct {
	errText, notice string
	reset           *web.ShownPassword
}

func (s *Server) renderUsers(w http.ResponseWriter, r *http.Request, status int, o usersOutcome) {
	users, err := s.st.Users(r.Context())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	log, err := s.st.AuditLog(r.Context(), auditEntriesRead)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	sess, _ := sessionFrom(r.Context())
	page := &web.UsersPage{Frame: s.frame(r, "Users", "/users"), Error: o.errText, Notice: o.notice, Reset: o.reset,
		Roles:       []string{store.RoleClinician, store.RoleCoordinator, store.RoleAdmin},
		MinPassword: store.MinPassword, MinAdminPassword: store.MinAdminPassword, MaxPassword: store.MaxPassword,
		PasswordURL: passwordURL}
	for _, u := range users {
		row := web.UserRow{Name: u.Name, Role: u.Role, Created: u.Created.UTC().Format(time.DateOnly), Disabled: u.Disabled,
			Self: u.ID == sess.User.ID, ResetURL: userActionURL(u.Name, "reset")}
		if u.Disabled {
			row.ToggleURL, row.ToggleLabel = userActionURL(u.Name, "enable"), "Enable"
		} else {
			row.ToggleURL, row.ToggleLabel = userActionURL(u.Name, "disable"), "Disable"
		}
		page.Users = append(page.Users, row)
	}
	page.Audit = foldAudit(log, auditRowsShown)
	s.render(w, r, status, page)
}

// The users screen reads the latest auditEntriesRead entries and shows at
// most auditRowsShown rows of them after folding.
const (
	auditEntriesRead = 1000
	auditRowsShown   = 100
)

// foldAudit turns audit entries (newest first) into the screen's rows,
// folding a run of consecutive entries with the same user, action, subject
// and client into one row that says how many there were and since when:
// paging through a visit's traces writes one entry per page, and forty
// equal rows would hide the other entries. The log itself keeps every
// entry; the folding is only on screen.
func foldAudit(log []store.AuditEntry, limit int) []web.AuditRow {
	const stamp = "2006-01-02T15:04:05Z"
	var rows []web.AuditRow
	var last store.AuditEntry
	for _, e := range log {
		if n := len(rows); n > 0 && e.User == last.User && e.Action == last.Action && e.Subject == last.Subject && e.Client == last.Client {
			rows[n-1].Times++
			rows[n-1].First = e.At.UTC().Format(stamp)
			continue
		}
		if len(rows) == limit {
			break
		}
		rows = append(rows, web.AuditRow{At: e.At.UTC().Format(stamp), User: e.User, Action: auditText(e.Action),
			Subject: e.Subject, Client: e.Client, Times: 1})
		last = e
	}
	return rows
}

// actor is the signed-in user making a change, as the audit log names them.
func actor(r *http.Request) store.Actor {
	sess, _ := sessionFrom(r.Context())
	return store.Actor{Name: sess.User.Name, Client: clientAddr(r)}
}

// accountProblem is the sentence for people of an account value the store
// refused, or "" when err is not one.
func accountProblem(err error) string {
	var ae *store.AccountError
	if errors.As(err, &ae) {
		return ae.Sentence()
	}
	return ""
}

// addUser creates a user from the form (admin only).
func (s *Server) addUser(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, formLimit)
	if err := r.ParseForm(); err != nil {
		s.fail(w, r, problem(http.StatusBadRequest, "the form could not be read"))
		return
	}
	name := strings.TrimSpace(r.PostForm.Get("name"))
	role := r.PostForm.Get("role")
	_, err := s.st.AddUser(r.Context(), actor(r), name, role, r.PostForm.Get("password"))
	switch {
	case errors.Is(err, store.ErrUserExists):
		s.renderUsers(w, r, http.StatusConflict, usersOutcome{errText: "A user named " + name + " exists already."})
		return
	case accountProblem(err) != "":
		s.renderUsers(w, r, http.StatusBadRequest, usersOutcome{errText: accountProblem(err)})
		return
	case err != nil:
		s.fail(w, r, err)
		return
	}
	s.renderUsers(w, r, http.StatusOK, usersOutcome{notice: "User " + name + " added as " + role + "."})
}

// disableUser, enableUser and resetUser are the row forms of the users
// screen (admin only); the path names the account.
func (s *Server) disableUser(w http.ResponseWriter, r *http.Request) { s.setDisabled(w, r, true) }
func (s *Server) enableUser(w http.ResponseWriter, r *http.Request)  { s.setDisabled(w, r, false) }

// targetUser reads the account a users-screen form names; when there is
// none, or the store fails, it has answered and ok is false.
func (s *Server) targetUser(w http.ResponseWriter, r *http.Request, name string) (u store.User, ok bool) {
	u, err := s.st.User(r.Context(), name)
	if errors.Is(err, store.ErrNoUser) {
		s.renderUsers(w, r, http.StatusNotFound, usersOutcome{errText: "There is no user named " + name + "."})
		return u, false
	}
	if err != nil {
		s.fail(w, r, err)
		return u, false
	}
	return u, true
}

func (s *Server) setDisabled(w http.ResponseWriter, r *http.Request, disable bool) {
	name := pathVar(r, "name")
	sess, _ := sessionFrom(r.Context())
	if disable && name == sess.User.Name {
		s.renderUsers(w, r, http.StatusConflict, usersOutcome{errText: "You cannot disable your own account here; another admin, or the command line, can."})
		return
	}
	u, ok := s.targetUser(w, r, name)
	if !ok {
		return
	}
	changed, err := s.st.SetDisabled(r.Context(), actor(r), u.Name, disable)
	switch {
	case errors.Is(err, store.ErrLastAdmin):
		s.renderUsers(w, r, http.StatusConflict, usersOutcome{errText: u.Name + " is the last enabled admin and stays enabled: without an admin nobody could manage the accounts. Add or enable another admin first."})
		return
	case errors.Is(err, store.ErrNoUser):
		s.renderUsers(w, r, http.StatusNotFound, usersOutcome{errText: "There is no user named " + name + "."})
		return
	case err != nil:
		s.fail(w, r, err)
		return
	}
	if disable {
		// The store has ended the sessions; the memo must not outlive them.
		s.sessions.forgetUser(u.ID)
	}
	var notice string
	switch {
	case !changed && disable:
		notice = u.Name + " was disabled already."
	case !changed:
		notice = u.Name + " was enabled already."
	case disable:
		notice = u.Name + " is disabled: they cannot sign in, and their open sessions have ended."
	default:
		notice = u.Name + " is enabled and can sign in again."
	}
	s.renderUsers(w, r, http.StatusOK, usersOutcome{notice: notice})
}

// resetUser gives the account a generated password, shown once on the
// answer, and ends its sessions.
func (s *Server) resetUser(w http.ResponseWriter, r *http.Request) {
	name := pathVar(r, "name")
	sess, _ := sessionFrom(r.Context())
	if name == sess.User.Name {
		s.renderUsers(w, r, http.StatusConflict, usersOutcome{errText: "Change your own password on the password screen, where your current password is asked for."})
		return
	}
	u, ok := s.targetUser(w, r, name)
	if !ok {
		return
	}
	password, err := store.GeneratePassword(u.Name, u.Role)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	err = s.st.ResetPassword(r.Context(), actor(r), u.Name, password)
	if errors.Is(err, store.ErrNoUser) {
		s.renderUsers(w, r, http.StatusNotFound, usersOutcome{errText: "There is no user named " + name + "."})
		return
	}
	if err != nil {
		s.fail(w, r, err)
		return
	}
	s.sessions.forgetUser(u.ID)
	o := usersOutcome{reset: &web.ShownPassword{User: u.Name, Password: password}}
	if u.Disabled {
		o.notice = u.Name + " is still disabled; enable the account for the new password to work."
	}
	s.renderUsers(w, r, http.StatusOK, o)
}

package server

import (
	"errors"
	"net/http"
	"strings"
	"time"

	"longwave/server/store"
	"longwave/web"
)

// usersPage lists the users and the latest audit entries (admin only).
func (s *Server) usersPage(w http.ResponseWriter, r *http.Request) {
	s.renderUsers(w, r, http.StatusOK, "", "")
}

func (s *Server) renderUsers(w http.ResponseWriter, r *http.Request, status int, errText, notice string) {
	users, err := s.st.Users(r.Context())
	if err != nil {
		s.fail(w, r, err)
		return
	}
	log, err := s.st.AuditLog(r.Context(), 100)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	page := &web.UsersPage{Frame: s.frame(r, "Users", "/users"), Error: errText, Notice: notice,
		Roles: []string{store.RoleClinician, store.RoleCoordinator, store.RoleAdmin}}
	for _, u := range users {
		page.Users = append(page.Users, web.UserRow{Name: u.Name, Role: u.Role, Created: u.Created.UTC().Format(time.DateOnly), Disabled: u.Disabled})
	}
	for _, e := range log {
		page.Audit = append(page.Audit, web.AuditRow{At: e.At.UTC().Format("2006-01-02T15:04:05Z"), User: e.User, Action: strings.ReplaceAll(e.Action, "_", " "), Subject: e.Subject, Client: e.Client})
	}
	s.render(w, r, status, page)
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
	_, err := s.st.CreateUser(r.Context(), name, role, r.PostForm.Get("password"))
	switch {
	case errors.Is(err, store.ErrUserExists):
		s.renderUsers(w, r, http.StatusConflict, "A user named "+name+" exists already.", "")
		return
	case errors.Is(err, store.ErrBadAccount):
		s.renderUsers(w, r, http.StatusBadRequest, strings.TrimPrefix(err.Error(), "store: invalid account value: "), "")
		return
	case err != nil:
		s.fail(w, r, err)
		return
	}
	if err := s.audit(r, store.AuditUserCreated, name+" ("+role+")"); err != nil {
		s.fail(w, r, err)
		return
	}
	s.renderUsers(w, r, http.StatusOK, "", "User "+name+" added as "+role+".")
}

package server

import (
	"errors"
	"net/http"

	"longwave/server/store"
	"longwave/web"
)

// passwordURL is the screen where every signed-in user changes their own
// password (linked from every screen's top bar).
const passwordURL = "/password"

// passwordPage shows the form: the current password, the new one twice.
func (s *Server) passwordPage(w http.ResponseWriter, r *http.Request) {
	s.renderPassword(w, r, http.StatusOK, "", "")
}

func (s *Server) renderPassword(w http.ResponseWriter, r *http.Request, status int, errText, notice string) {
	sess, _ := sessionFrom(r.Context())
	page := &web.PasswordPage{Frame: s.frame(r, "Your password", passwordURL), Error: errText, Notice: notice,
		MinLength: store.MinPasswordFor(sess.User.Role), MaxLength: store.MaxPassword, Admin: sess.User.Role == store.RoleAdmin}
	s.render(w, r, status, page)
}

// changePassword checks the current password (after the same growing
// delay as a sign-in, and counting a wrong one as a failed sign-in, so a
// left-open session cannot be used to guess it quickly), sets the new one
// and ends the user's other sessions; this session goes on.
func (s *Server) changePassword(w http.ResponseWriter, r *http.Request) {
	r.Body = http.MaxBytesReader(w, r.Body, formLimit)
	if err := r.ParseForm(); err != nil {
		s.fail(w, r, problem(http.StatusBadRequest, "the form could not be read"))
		return
	}
	ctx := r.Context()
	sess, token, err := s.lookupSession(r)
	if err != nil {
		s.fail(w, r, errSignInNeeded)
		return
	}
	current, next := r.PostForm.Get("current"), r.PostForm.Get("password")
	if next != r.PostForm.Get("again") {
		s.renderPassword(w, r, http.StatusBadRequest, "The two new passwords differ; type the same one twice.", "")
		return
	}
	addr := clientAddr(r)
	n, err := s.st.SignInFailures(ctx, sess.User.Name, addr, delayWindow)
	if err != nil {
		s.fail(w, r, err)
		return
	}
	if err := s.sleep(ctx, signInDelay(n)); err != nil {
		return // the client went away
	}
	err = s.st.ChangePassword(ctx, actor(r), current, next, token)
	switch {
	case errors.Is(err, store.ErrBadCredentials):
		if err := s.st.RecordSignInFailure(ctx, sess.User.Name, addr, delayWindow); err != nil {
			s.fail(w, r, err)
			return
		}
		s.renderPassword(w, r, http.StatusUnauthorized, "The current password is wrong; nothing was changed.", "")
		return
	case errors.Is(err, store.ErrNoUser): // disabled meanwhile
		s.sessions.forgetUser(sess.User.ID)
		s.fail(w, r, errSignInNeeded)
		return
	case errors.Is(err, store.ErrSamePassword):
		s.renderPassword(w, r, http.StatusBadRequest, "The new password is the same as the current one; choose another.", "")
		return
	case accountProblem(err) != "":
		s.renderPassword(w, r, http.StatusBadRequest, accountProblem(err)+" Nothing was changed.", "")
		return
	case err != nil:
		s.fail(w, r, err)
		return
	}
	if err := s.st.ClearSignInFailures(ctx, sess.User.Name, addr); err != nil {
		s.fail(w, r, err)
		return
	}
	// The store ended the other sessions; forget them here too (this one is
	// read again from the store on its next request).
	s.sessions.forgetUser(sess.User.ID)
	s.renderPassword(w, r, http.StatusOK, "", "Your password is changed. Your sessions on other devices and browsers have ended; this one goes on.")
}

package main

import (
	"errors"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"longwave/server"
	"longwave/server/demo"
	"longwave/server/intake"
	"longwave/server/store"
)

// demoUser is the account the demo prints for signing in.
const demoUser = "demo"

func init() {
	register(&command{
		name: "demo",
		summary: "Build an invented memory clinic from synthetic recordings and serve it.\n" +
			"Every name and number in it is invented. Without --db the clinic is built in a temporary database,\n" +
			"removed on exit, so invented patients never land in a clinic's longwave.db; with --db an empty\n" +
			"database is filled and one already holding patients is served as it is. It prints the address and a sign-in.",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := fs.String("db", "", "keep the demo in database `FILE` (default: a temporary database removed on exit)")
			addr := fs.String("addr", server.DefaultAddr, "`HOST:PORT` to listen on")
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("demo takes no arguments")
				}
				path := *db
				if path == "" {
					tmp, err := os.MkdirTemp("", "longwave-demo-")
					if err != nil {
						return err
					}
					defer os.RemoveAll(tmp)
					path = filepath.Join(tmp, "demo.db")
				}
				st, err := openStore(path)
				if err != nil {
					return err
				}
				defer st.Close()
				pipe := intake.New(st)
				have, err := st.Patients(e.ctx)
				if err != nil {
					return err
				}
				if len(have) == 0 {
					bar := isTerminal(e.stderr)
					start := time.Now()
					var progress func(done, total int)
					if bar {
						progress = func(done, total int) { drawProgress(e.stderr, done, total, time.Since(start)) }
					}
					fmt.Fprintf(e.stdout, "building the invented clinic in %s …\n", path)
					sum, err := demo.Build(e.ctx, pipe, demo.Options{}, progress)
					if bar {
						fmt.Fprintln(e.stderr)
					}
					if err != nil {
						return err
					}
					fmt.Fprintf(e.stdout, "built %d invented patients with %d visits in %.1f s\n", sum.Patients, sum.Visits, sum.Elapsed.Seconds())
				} else {
					fmt.Fprintf(e.stdout, "%s already holds %d patients: serving it as it is\n", path, len(have))
				}
				password, _, err := readPassword(nil, demoUser, store.RoleAdmin)
				if err != nil {
					return err
				}
				actor, err := cliActor("")
				if err != nil {
					actor = store.Actor{Name: "cli:" + demoUser}
				}
				if _, err := st.AddUser(e.ctx, actor, demoUser, store.RoleAdmin, password); err != nil {
					if !errors.Is(err, store.ErrUserExists) {
						return err
					}
					if err := st.ResetPassword(e.ctx, actor, demoUser, password); err != nil {
						return err
					}
				}
				srv, err := server.New(server.Config{Addr: *addr}, st, pipe)
				if err != nil {
					return err
				}
				if err := srv.Listen(); err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "demo clinic (invented names and numbers) at %s\nsign in as %q with password %s\n(stop with Ctrl-C)\n",
					srv.URL(), demoUser, password)
				return srv.Run(e.ctx)
			}
		},
	})
}

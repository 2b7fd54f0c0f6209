package main

import (
	"flag"
	"fmt"

	"longwave/server"
	"longwave/server/intake"
)

func init() {
	register(&command{
		name: "serve",
		summary: "Serve the web view of the database: cohort, patient courses, visits, uploads.\n" +
			"Binds to 127.0.0.1 unless told otherwise; every page needs a signed-in user (create one with \"user add\").",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			addr := fs.String("addr", server.DefaultAddr, "`HOST:PORT` to listen on")
			cert := fs.String("tls-cert", "", "PEM certificate `FILE`; with --tls-key the service speaks HTTPS only")
			key := fs.String("tls-key", "", "PEM private key `FILE` for --tls-cert")
			return func(args []string) error {
				if len(args) > 0 {
					return usagef("serve takes no arguments")
				}
				if (*cert == "") != (*key == "") {
					return usagef("--tls-cert and --tls-key go together")
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				srv, err := server.New(server.Config{Addr: *addr, TLSCert: *cert, TLSKey: *key}, st, intake.New(st))
				if err != nil {
					return err
				}
				if err := srv.Listen(); err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "serving %s at %s (stop with Ctrl-C)\n", *db, srv.URL())
				return srv.Run(e.ctx)
			}
		},
	})
}

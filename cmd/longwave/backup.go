package main

import (
	"flag"
	"fmt"
	"os"
)

func init() {
	register(&command{
		name: "backup",
		args: "FILE",
		summary: "Write a consistent copy of the database to FILE, safe while the server runs.\n" +
			"The recording files are not copied: the data folder only gains files, so copy it with any file tool after the backup.",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			return func(args []string) error {
				if len(args) != 1 {
					return usagef("give the backup FILE to write")
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				if err := st.Backup(e.ctx, args[0]); err != nil {
					return err
				}
				info, err := os.Stat(args[0])
				if err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "backup of %s written to %s (%d bytes); recordings stay in %s\n", *db, args[0], info.Size(), st.DataDir())
				return nil
			}
		},
	})
}

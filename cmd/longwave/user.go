package main

import (
	"bufio"
	"crypto/rand"
	"flag"
	"fmt"
	"io"
	"strings"

	"longwave/server/store"
)

// generatedPasswordLength in characters of the alphabet below (about 5.6
// bits each: 20 characters ≈ 112 bits).
const generatedPasswordLength = 20

const passwordAlphabet = "abcdefghijkmnpqrstuvwxyzABCDEFGHJKLMNPQRSTUVWXYZ23456789"

func init() {
	register(&command{
		name: "user",
		args: "add",
		summary: "Manage the web service's accounts: \"user add\" creates one.\n" +
			"The password is read from the first line of standard input when it is not a terminal;\n" +
			"otherwise (or when that line is empty) one is generated and printed once.",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			name := fs.String("name", "", "sign-in `NAME` of the new user")
			role := fs.String("role", "clinician", "`ROLE`: clinician, coordinator or admin")
			return func(args []string) error {
				if len(args) != 1 || args[0] != "add" {
					return usagef("the only user action is \"add\"")
				}
				if *name == "" {
					return usagef("--name is required")
				}
				if !store.ValidRole(*role) {
					return usagef("--role %q: want clinician, coordinator or admin", *role)
				}
				password, generated, err := readPassword(e.stdin)
				if err != nil {
					return err
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				u, err := st.CreateUser(e.ctx, *name, *role, password)
				if err != nil {
					return err
				}
				fmt.Fprintf(e.stdout, "user %s added with role %s\n", u.Name, u.Role)
				if generated {
					fmt.Fprintf(e.stdout, "password (shown once): %s\n", password)
				}
				return nil
			}
		},
	})
}

// readPassword takes the first line of stdin unless stdin is a terminal; an
// empty line or a terminal means a generated password.
func readPassword(stdin io.Reader) (string, bool, error) {
	if stdin != nil && !isTerminalReader(stdin) {
		line, err := bufio.NewReader(stdin).ReadString('\n')
		if err != nil && err != io.EOF {
			return "", false, fmt.Errorf("read password from standard input: %w", err)
		}
		if pw := strings.TrimRight(line, "\r\n"); pw != "" {
			return pw, false, nil
		}
	}
	// Rejection sampling: bytes at or above the largest multiple of the
	// alphabet's size are drawn again, so every character is equally likely.
	limit := 256 - 256%len(passwordAlphabet)
	out := make([]byte, 0, generatedPasswordLength)
	buf := make([]byte, 1)
	for len(out) < generatedPasswordLength {
		if _, err := rand.Read(buf); err != nil {
			return "", false, err
		}
		if int(buf[0]) < limit {
			out = append(out, passwordAlphabet[int(buf[0])%len(passwordAlphabet)])
		}
	}
	return string(out), true, nil
}

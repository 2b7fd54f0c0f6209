package main

import (
	"bufio"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/user"
	"strings"
	"text/tabwriter"
	"time"
	"unicode"

	"longwave/server/store"
)

// userActions are the actions of "longwave user", in the order --help
// gives them.
var userActions = []string{"list", "add", "disable", "enable", "reset"}

func init() {
	register(&command{
		name: "user",
		args: "list | add | disable | enable | reset",
		summary: "Manage the web service's accounts over their lifetime.\n" +
			"  list     every account with its role, state and the day it was added\n" +
			"  add      a new account (--name, --role)\n" +
			"  disable  stop an account signing in and end its sessions (--name)\n" +
			"  enable   let a disabled account sign in again (--name)\n" +
			"  reset    give an account a new password and end its sessions (--name)\n" +
			"For add and reset the password is read from the first line of standard input when it is\n" +
			"not a terminal; otherwise (or when that line is empty) one is generated and printed once.",
		more: "Passwords: at least 8 characters, 12 for an admin, at most 256; not a commonly used password,\n" +
			"a repeated pattern, a run of consecutive characters, the user name or the service's name\n" +
			"(NIST SP 800-63B). No rules about digits or capitals, and no expiry.\n" +
			"\n" +
			"Every change is written to the audit log as made by \"cli:\" and the name given by --by, else\n" +
			"the operating-system user who ran the command (the one behind sudo when run through sudo).\n" +
			"The last enabled admin cannot be disabled. A service already running stops honouring a\n" +
			"disabled or reset account's sessions within 2 seconds (the users screen does it at once).\n",
		setup: func(fs *flag.FlagSet, e *env) func([]string) error {
			db := dbFlag(fs)
			name := fs.String("name", "", "sign-in `NAME` of the account (add, disable, enable, reset)")
			role := fs.String("role", "clinician", "`ROLE` of a new account: clinician, coordinator or admin")
			by := fs.String("by", "", "`PERSON` making the change, for the audit log (default: the operating-system user)")
			return func(args []string) error {
				if len(args) != 1 || !oneOf(args[0], userActions) {
					return usagef("want one action: %s", strings.Join(userActions, ", "))
				}
				action := args[0]
				if action != "list" && *name == "" {
					return usagef("user %s: --name is required", action)
				}
				if action == "add" && !store.ValidRole(*role) {
					return usagef("--role %q: want clinician, coordinator or admin", *role)
				}
				actor, err := cliActor(*by)
				if err != nil {
					return err
				}
				st, err := openStore(*db)
				if err != nil {
					return err
				}
				defer st.Close()
				switch action {
				case "list":
					return listUsers(e, st)
				case "add":
					password, generated, err := readPassword(e.stdin, *name, *role)
					if err != nil {
						return err
					}
					u, err := st.AddUser(e.ctx, actor, *name, *role, password)
					if err != nil {
						return err
					}
					fmt.Fprintf(e.stdout, "user %s added with role %s\n", u.Name, u.Role)
					if generated {
						fmt.Fprintf(e.stdout, "password (shown once): %s\n", password)
					}
				case "disable", "enable":
					disable := action == "disable"
					changed, err := st.SetDisabled(e.ctx, actor, *name, disable)
					if err != nil {
						return err
					}
					switch {
					case !changed:
						fmt.Fprintf(e.stdout, "user %s was already %sd: nothing changed\n", *name, action)
					case disable:
						fmt.Fprintf(e.stdout, "user %s disabled; their sessions have ended\n", *name)
					default:
						fmt.Fprintf(e.stdout, "user %s enabled\n", *name)
					}
				case "reset":
					u, err := st.User(e.ctx, *name)
					if err != nil {
						return err
					}
					password, generated, err := readPassword(e.stdin, u.Name, u.Role)
					if err != nil {
						return err
					}
					if err := st.ResetPassword(e.ctx, actor, u.Name, password); err != nil {
						return err
					}
					fmt.Fprintf(e.stdout, "password of %s reset; their sessions have ended\n", u.Name)
					if generated {
						fmt.Fprintf(e.stdout, "password (shown once): %s\n", password)
					}
					if u.Disabled {
						fmt.Fprintf(e.stdout, "%s is still disabled: \"user enable\" lets them sign in\n", u.Name)
					}
				}
				return nil
			}
		},
	})
}

func oneOf(s string, list []string) bool {
	for _, v := range list {
		if s == v {
			return true
		}
	}
	return false
}

// listUsers prints every account as a table.
func listUsers(e *env, st *store.Store) error {
	users, err := st.Users(e.ctx)
	if err != nil {
		return err
	}
	if len(users) == 0 {
		fmt.Fprintln(e.stdout, "no accounts yet: \"longwave user add --name NAME --role admin\" makes the first")
		return nil
	}
	tw := tabwriter.NewWriter(e.stdout, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "name\trole\tstate\tadded")
	for _, u := range users {
		state := "active"
		if u.Disabled {
			state = "disabled"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\n", u.Name, u.Role, state, u.Created.UTC().Format(time.DateOnly))
	}
	return tw.Flush()
}

// errNoOSUser is returned when neither --by nor the operating system names
// who runs the command.
var errNoOSUser = errors.New("cannot tell who runs this command for the audit log: give --by NAME")

// cliActor is the audit log's name for a change made on the command line:
// "cli:" and --by, or else the operating-system user (SUDO_USER first, so a
// change made through sudo names the person, not root). The prefix keeps a
// command-line change apart from a web user of the same name.
func cliActor(by string) (store.Actor, error) {
	who := strings.TrimSpace(by)
	if who == "" {
		who = os.Getenv("SUDO_USER")
	}
	if who == "" {
		if u, err := user.Current(); err == nil {
			who = u.Username
		}
	}
	if who == "" {
		who = os.Getenv("USER")
	}
	if who == "" {
		return store.Actor{}, errNoOSUser
	}
	if len(who) > store.MaxUserName || strings.IndexFunc(who, func(r rune) bool { return !unicode.IsPrint(r) }) >= 0 {
		return store.Actor{}, usagef("--by: at most %d bytes of printable characters", store.MaxUserName)
	}
	return store.Actor{Name: "cli:" + who}, nil
}

// readPassword takes the first line of stdin unless stdin is a terminal; an
// empty line or a terminal means a password generated for the user name
// and role (store.GeneratePassword).
func readPassword(stdin io.Reader, name, role string) (string, bool, error) {
	if stdin != nil && !isTerminalReader(stdin) {
		line, err := bufio.NewReader(stdin).ReadString('\n')
		if err != nil && err != io.EOF {
			return "", false, fmt.Errorf("read password from standard input: %w", err)
		}
		if pw := strings.TrimRight(line, "\r\n"); pw != "" {
			return pw, false, nil
		}
	}
	pw, err := store.GeneratePassword(name, role)
	if err != nil {
		return "", false, err
	}
	return pw, true, nil
}

package store

// The password rules of longwave's accounts, after NIST SP 800-63B (2017),
// §5.1.1.2 "Memorized Secret Verifiers": a least length (8 characters; 12
// for an admin, who can change every account), room for long passphrases
// (at least 64 characters; we take 256), every Unicode code point counted
// as one character, no truncation, a check against commonly used values,
// repetitive or sequential characters and words of the context (the user's
// name, the service's name), no composition rules (no "one digit, one
// capital") and no forced periodic change.
//
// Passwords are not Unicode-normalised (the standard says SHOULD, NFKC or
// NFKD): no normalisation package is among longwave's dependencies, and
// browsers and keyboards send the composed (NFC) form of accented letters
// in practice.

import (
	"crypto/rand"
	"crypto/sha256"
	_ "embed"
	"encoding/base64"
	"fmt"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"
)

// Password lengths, in characters (Unicode code points).
const (
	// MinPassword is the shortest password of a clinician or coordinator.
	MinPassword = 8
	// MinAdminPassword is the shortest password of an admin.
	MinAdminPassword = 12
	// MaxPassword is the longest password accepted; longer than bcrypt's
	// 72 bytes is fine (see bcryptInput).
	MaxPassword = 256
	// bcryptMaxBytes is how much of its input bcrypt reads.
	bcryptMaxBytes = 72
	// minListedBase is the shortest stripped form looked up in the list:
	// shorter stems ("abc" of "abc12345") would refuse too much.
	minListedBase = 4
	// maxPatternUnit is the longest unit whose repetition ("abab…",
	// "123123…") is refused.
	maxPatternUnit = 4
	// minNameAnywhere is the length from which a user name is refused
	// anywhere in a password; a shorter one only as a word of its own.
	minNameAnywhere = 5
	// serviceName is the context word NIST names first: the service's own.
	serviceName = "longwave"
)

// AccountError says what is wrong with an account value, in words for the
// person who typed it. It matches ErrBadAccount with errors.Is.
type AccountError struct {
	Field  string // "password", "user name" or "role"
	Reason string // a predicate: "must have at least 8 characters (this one has 5)"
}

func (e *AccountError) Error() string {
	return "store: invalid account value: " + e.Field + " " + e.Reason
}

func (e *AccountError) Unwrap() error { return ErrBadAccount }

// Sentence is the error as a sentence for a screen or a terminal.
func (e *AccountError) Sentence() string {
	return "The " + e.Field + " " + e.Reason + "."
}

func passwordError(format string, args ...any) error {
	return &AccountError{Field: "password", Reason: fmt.Sprintf(format, args...)}
}

// MinPasswordFor returns the least password length of a role.
func MinPasswordFor(role string) int {
	if role == RoleAdmin {
		return MinAdminPassword
	}
	return MinPassword
}

// CheckNewPassword applies the password rules to a password chosen for the
// user name with role, and returns an *AccountError saying the first rule
// it breaks, or nil.
func CheckNewPassword(name, role, password string) error {
	if !utf8.ValidString(password) {
		return passwordError("is not valid UTF-8 text")
	}
	n := utf8.RuneCountInString(password)
	if least := MinPasswordFor(role); n < least {
		if role == RoleAdmin {
			return passwordError("of an admin must have at least %d characters (this one has %d)", least, n)
		}
		return passwordError("must have at least %d characters (this one has %d)", least, n)
	}
	if n > MaxPassword {
		return passwordError("may have at most %d characters (this one has %d)", MaxPassword, n)
	}
	for _, r := range password {
		if unicode.IsControl(r) {
			return passwordError("may not hold control characters such as tabs or line breaks")
		}
	}
	lower := strings.ToLower(password)
	if commonPassword(lower) {
		return passwordError("is one of the commonly used passwords that are tried first; choose another, for example a few unrelated words")
	}
	if repeatsPattern(lower) {
		return passwordError("only repeats a short pattern")
	}
	if sequential(lower) {
		return passwordError("is a run of consecutive characters")
	}
	if holdsName(lower, strings.ToLower(name)) {
		return passwordError("may not hold the user name")
	}
	if strings.Contains(lower, serviceName) {
		return passwordError("may not hold the name of this service")
	}
	return nil
}

// holdsName reports whether a lower-cased password holds the lower-cased
// user name: anywhere when the name has minNameAnywhere characters or more,
// else as a word of its own (not inside a longer run of letters, so "amy"
// is found in "amy-2024" but not in "dreamy-lagoon").
func holdsName(lower, name string) bool {
	if utf8.RuneCountInString(name) < 3 {
		return false
	}
	if utf8.RuneCountInString(name) >= minNameAnywhere {
		return strings.Contains(lower, name)
	}
	for i := 0; ; {
		j := strings.Index(lower[i:], name)
		if j < 0 {
			return false
		}
		start, end := i+j, i+j+len(name)
		before, _ := utf8.DecodeLastRuneInString(lower[:start])
		after, _ := utf8.DecodeRuneInString(lower[end:])
		if (start == 0 || !unicode.IsLetter(before)) && (end == len(lower) || !unicode.IsLetter(after)) {
			return true
		}
		i = start + 1
	}
}

// commonPasswordsText is the embedded list, written from memory for
// longwave (see the file's header).
//
//go:embed commonpasswords.txt
var commonPasswordsText string

// commonPasswordSet is the list as a set, built on first use.
var commonPasswordSet = sync.OnceValue(func() map[string]struct{} {
	set := make(map[string]struct{}, 2048)
	for _, line := range strings.Split(commonPasswordsText, "\n") {
		line = strings.TrimSpace(line)
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		set[strings.ToLower(line)] = struct{}{}
	}
	return set
})

// CommonPasswords returns the number of entries of the embedded list.
func CommonPasswords() int { return len(commonPasswordSet()) }

// commonPassword reports whether lower (a lower-cased password) is on the
// list: as it is, with the digits and signs at its ends taken off
// ("sunshine2024!" → "sunshine"), with letter-for-digit swaps undone
// ("p@ssw0rd" → "password"), or both.
func commonPassword(lower string) bool {
	set := commonPasswordSet()
	if _, ok := set[lower]; ok {
		return true
	}
	stem := strings.TrimFunc(lower, notLetter)
	for _, c := range []string{stem, unswap(lower), unswap(stem), strings.TrimFunc(unswap(lower), notLetter)} {
		if utf8.RuneCountInString(c) < minListedBase {
			continue
		}
		if _, ok := set[c]; ok {
			return true
		}
	}
	return false
}

func notLetter(r rune) bool { return !unicode.IsLetter(r) }

// swaps are the digit and sign stand-ins for letters people use most.
var swaps = strings.NewReplacer("0", "o", "1", "i", "3", "e", "4", "a", "5", "s", "7", "t", "@", "a", "$", "s")

func unswap(s string) string { return swaps.Replace(s) }

// repeatsPattern reports whether s is one unit of 1 to maxPatternUnit
// characters repeated ("aaaaaaaa", "12121212", "abcabcab").
func repeatsPattern(s string) bool {
	r := []rune(s)
	for unit := 1; unit <= maxPatternUnit && unit < len(r); unit++ {
		same := true
		for i := unit; i < len(r); i++ {
			if r[i] != r[i-unit] {
				same = false
				break
			}
		}
		if same {
			return true
		}
	}
	return false
}

// sequential reports whether every character of s is the one after (or
// every one the one before) the previous ("abcdefgh", "87654321").
func sequential(s string) bool {
	r := []rune(s)
	if len(r) < 2 {
		return false
	}
	step := r[1] - r[0]
	if step != 1 && step != -1 {
		return false
	}
	for i := 2; i < len(r); i++ {
		if r[i]-r[i-1] != step {
			return false
		}
	}
	return true
}

// bcryptInput is what bcrypt hashes for a password. bcrypt reads at most
// 72 bytes, and NIST says a password SHALL NOT be truncated, so a longer
// password is first reduced to the base64 text of its SHA-256 (44 bytes,
// no NUL byte), which depends on every byte of it. Passwords of at most 72
// bytes go in as they are, so every hash made before this rule still
// matches.
func bcryptInput(password string) []byte {
	if len(password) <= bcryptMaxBytes {
		return []byte(password)
	}
	sum := sha256.Sum256([]byte(password))
	return []byte(base64.StdEncoding.EncodeToString(sum[:]))
}

// GeneratedPasswordLength is the length of GeneratePassword's passwords, in
// characters of generatedAlphabet (about 5.8 bits each: 20 characters are
// about 116 bits).
const GeneratedPasswordLength = 20

// generatedAlphabet leaves out look-alikes (l, o, I, O, 0, 1) so that a
// password read off a screen is typed right.
const generatedAlphabet = "abcdefghijkmnpqrstuvwxyzABCDEFGHJKLMNPQRSTUVWXYZ23456789"

// GeneratePassword returns a random password for the user name with role
// that passes CheckNewPassword (one that happens to hold the user name is
// drawn again). Each character is drawn uniformly: bytes at or above the
// largest multiple of the alphabet's size are drawn again.
func GeneratePassword(name, role string) (string, error) {
	limit := 256 - 256%len(generatedAlphabet)
	buf := make([]byte, 64)
	for {
		out := make([]byte, 0, GeneratedPasswordLength)
		for len(out) < GeneratedPasswordLength {
			if _, err := rand.Read(buf); err != nil {
				return "", fmt.Errorf("store: generate password: %w", err)
			}
			for _, b := range buf {
				if int(b) < limit && len(out) < GeneratedPasswordLength {
					out = append(out, generatedAlphabet[int(b)%len(generatedAlphabet)])
				}
			}
		}
		if pw := string(out); CheckNewPassword(name, role, pw) == nil {
			return pw, nil
		}
	}
}

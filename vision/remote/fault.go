package remote

import (
	"errors"
	"fmt"
	"strings"
)

// ErrPolicyFault is wrapped by every error that is the external policy's
// fault (it crashed, hung, answered wrongly, refused the session). A study
// records the affected cell as failed and can retry it; errors that do not
// wrap it (a bad --policy spelling, a missing program) are the caller's.
var ErrPolicyFault = errors.New("policy fault")

// Kind classifies a fault.
type Kind string

// Fault kinds.
const (
	// Crash: the process exited or closed its output.
	Crash Kind = "crash"
	// Timeout: no (complete) reply within the step or handshake timeout.
	Timeout Kind = "timeout"
	// Garbage: a reply that is not a well-formed header line.
	Garbage Kind = "garbage"
	// Protocol: a well-formed reply that breaks the protocol (wrong
	// message, wrong step number, wrong version).
	Protocol Kind = "protocol"
	// Shape: an action of the wrong length, or not a valid choice.
	Shape Kind = "shape"
	// NonFinite: a NaN or infinite action value.
	NonFinite Kind = "non-finite"
	// Bounds: a continuous value outside the action bounds (without
	// Config.Clamp).
	Bounds Kind = "bounds"
	// TooLarge: a header line longer than MaxLine, or a reply payload.
	TooLarge Kind = "too-large"
	// Refused: the policy refused the session at the handshake.
	Refused Kind = "refused"
	// Reported: the policy sent an error message.
	Reported Kind = "reported"
	// IO: writing to the policy failed.
	IO Kind = "io"
)

// FaultError is the error of a policy fault. Its message is one line that
// names the policy and the step.
type FaultError struct {
	// Policy is the target as given ("exec:python3 p.py", "tcp://...").
	Policy string
	// Episode is the episode index in this session (from 0); Step the
	// step within it; Step is -1 outside steps (handshake, start, end).
	Episode, Step int
	// Phase is "handshake", "step", "end" or "shutdown".
	Phase string
	Kind  Kind
	// Detail says what was wrong.
	Detail string
	// Stderr is the last line the process wrote to its stderr, if any.
	Stderr string
	// Log is the file holding the process's whole stderr, if kept.
	Log string
}

// Error returns the one-line message.
func (e *FaultError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "policy %s: ", e.Policy)
	switch {
	case e.Phase == "step":
		// The episode is not numbered here: the session's count from 0
		// is not the caller's, which wraps this message with its own.
		fmt.Fprintf(&b, "step %d: ", e.Step)
	default:
		fmt.Fprintf(&b, "%s: ", e.Phase)
	}
	fmt.Fprintf(&b, "%s: %s", e.Kind, e.Detail)
	if e.Stderr != "" {
		fmt.Fprintf(&b, " (stderr: %s)", e.Stderr)
	}
	if e.Log != "" {
		fmt.Fprintf(&b, " (log %s)", e.Log)
	}
	return oneLine(b.String())
}

// Is makes errors.Is(err, ErrPolicyFault) true.
func (e *FaultError) Is(target error) bool { return target == ErrPolicyFault }

// oneLine replaces line breaks and control characters so that a message
// stays on one line.
func oneLine(s string) string {
	return strings.Map(func(r rune) rune {
		if r < 0x20 || r == 0x7f {
			return ' '
		}
		return r
	}, s)
}

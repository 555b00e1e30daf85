// Package remote runs a user's own policy in another process, or on
// another machine, over tilebench's policy protocol (docs/
// policy-protocol.md): a child process over its stdin/stdout
// ("exec:python3 my_policy.py --flag", split into words as a shell would,
// with no shell) or a TCP connection ("tcp://127.0.0.1:7000").
//
// Policy is the adapter: it satisfies vision.Policy, so play, verify,
// stress, sizes and studies use an external policy as they use a built-in
// one. It checks every reply (well-formed, the right step, the right
// length or a valid choice, finite, within bounds), and turns a crash, a
// hang past the timeout, garbage or an oversize reply into a one-line
// *FaultError that names the policy and the step and wraps
// ErrPolicyFault; the child's process group is then killed and its stderr
// kept in the caller's log folder.
//
// Serve is the policy side of the protocol for policies written in Go.
package remote

//go:build !unix

package alerts

import "os/exec"

// setProcessGroup leaves the default: cancellation kills the process.
func setProcessGroup(cmd *exec.Cmd) {}

package proc

import (
	"os"
	"os/exec"
	"testing"
)

func TestAlive(t *testing.T) {
	if !Alive(os.Getpid()) {
		t.Errorf("this process reads as gone")
	}
	if Alive(0) || Alive(-1) {
		t.Errorf("pid 0 or -1 reads as alive")
	}
	cmd := exec.Command(os.Args[0], "-test.run=^$")
	if err := cmd.Run(); err != nil {
		t.Fatal(err)
	}
	if Alive(cmd.Process.Pid) {
		t.Errorf("a process that exited and was waited for reads as alive")
	}
}

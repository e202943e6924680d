package main_test

// Crash safety: golden updates and report writes killed with SIGKILL at
// seeded random moments leave either the complete old files or the complete
// new ones, and concurrent updates never interleave.

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"syscall"
	"testing"
	"time"
)

// goldenSet reads the golden files (*.golden) of a directory by name.
func goldenSet(t *testing.T, dir string) map[string]string {
	t.Helper()
	paths, err := filepath.Glob(filepath.Join(dir, "*.golden"))
	if err != nil {
		t.Fatal(err)
	}
	set := map[string]string{}
	for _, p := range paths {
		set[filepath.Base(p)] = string(readBytes(t, p))
	}
	return set
}

// sameSet reports whether two golden sets hold the same files, byte for byte.
func sameSet(a, b map[string]string) bool {
	if len(a) != len(b) {
		return false
	}
	for k, v := range a {
		if w, ok := b[k]; !ok || w != v {
			return false
		}
	}
	return true
}

// recorded returns the golden files an update from results writes into an
// empty directory.
func (f *relFixture) recorded(t *testing.T, results string) map[string]string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "g")
	f.mustSG(t, t.TempDir(), 0, "golden", "update", "--suite", f.suite, "--golden", dir, "--from", results, "--reason", "reference", "--who", "crash-test")
	return goldenSet(t, dir)
}

// whichSet names the set a directory holds, or fails the test.
func whichSet(t *testing.T, dir string, sets map[string]map[string]string) string {
	t.Helper()
	got := goldenSet(t, dir)
	for name, s := range sets {
		if sameSet(got, s) {
			return name
		}
	}
	var names []string
	for k := range got {
		names = append(names, k)
	}
	t.Fatalf("%s holds a golden set that is neither complete old nor complete new files (files %v)", dir, names)
	return ""
}

// logEntries counts the approval entries of a log's text.
func logEntries(log string) int {
	return strings.Count(log, "\nend\n") + boolInt(strings.HasPrefix(log, "end\n"))
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// strayEntries lists what a golden directory holds besides golden files,
// the approval log and a (stale) update lock.
func strayEntries(t *testing.T, dir string) []string {
	t.Helper()
	entries, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var stray []string
	for _, e := range entries {
		n := e.Name()
		if strings.HasSuffix(n, ".golden") || n == "APPROVALS.log" || n == ".update-lock" {
			continue
		}
		stray = append(stray, n)
	}
	return stray
}

// startSG starts the binary without waiting for it.
func (f *relFixture) startSG(t *testing.T, dir string, args ...string) (*exec.Cmd, *bytes.Buffer) {
	t.Helper()
	cmd := exec.Command(f.bin, args...)
	cmd.Dir = dir
	cmd.Env = childEnv(dir, nil)
	var out bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &out
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	return cmd, &out
}

// exitCode waits for a command and returns its exit code (-1 when killed).
func exitCode(cmd *exec.Cmd) int {
	cmd.Wait()
	return cmd.ProcessState.ExitCode()
}

// medianDuration runs fn n times and returns the median wall time.
func medianDuration(n int, fn func()) time.Duration {
	var ds []time.Duration
	for range n {
		start := time.Now()
		fn()
		ds = append(ds, time.Since(start))
	}
	slices.Sort(ds)
	return ds[len(ds)/2]
}

// TestGoldenUpdateSurvivesSIGKILL kills 'golden update' at 100 seeded random
// moments, alternating between two results files. After each kill 'golden
// verify' must pass and the directory must hold exactly the old or the new
// golden files, with the approval log grown by one entry exactly when the
// files changed. Every tenth update runs to the end and must succeed, so a
// lock left by a killed update never blocks the next one.
func TestGoldenUpdateSurvivesSIGKILL(t *testing.T) {
	f := fixture(t)
	sets := map[string]map[string]string{"base": f.recorded(t, f.baseRes), "cand": f.recorded(t, f.candRes)}
	from := map[string]string{"base": f.baseRes, "cand": f.candRes}
	if sameSet(sets["base"], sets["cand"]) {
		t.Fatal("the two results give the same golden files; the test could not tell old from new")
	}
	dir := t.TempDir()
	g := filepath.Join(dir, "g")
	update := func(which, reason string) []string {
		return []string{"golden", "update", "--suite", f.suite, "--golden", g, "--from", from[which], "--reason", reason, "--who", "crash-test"}
	}
	other := map[string]string{"base": "cand", "cand": "base"}
	cur := "base"
	f.mustSG(t, dir, 0, update(cur, "start")...)
	// The update's own duration (process start included) bounds the delays.
	dur := medianDuration(3, func() {
		cur = other[cur]
		f.mustSG(t, dir, 0, update(cur, "timing")...)
	})
	t.Logf("one golden update takes %v (median of 3); kills land 0–%v after the start", dur, dur)

	// The lock is linked into place with its pid already written, so a kill
	// can no longer leave an empty one (TestEmptyLockIsTakenOver); should one
	// appear, a full update removes it, as the message advises, and the test
	// fails at the end.
	emptyLocks := 0
	fullUpdate := func(args ...string) {
		t.Helper()
		r := f.sg(t, dir, nil, args...)
		if r.code == 2 && strings.Contains(r.stderr, "held by process );") {
			emptyLocks++
			t.Logf("known bug: a killed update left an empty lock; removing it by hand")
			if err := os.Remove(filepath.Join(g, ".update-lock")); err != nil {
				t.Fatal(err)
			}
			r = f.sg(t, dir, nil, args...)
		}
		if r.code != 0 {
			t.Fatalf("sparsegate %q: exit %d, want 0\n%s%s", args, r.code, r.stdout, r.stderr)
		}
	}
	rng := rand.New(rand.NewPCG(20261202, 7))
	var before, after, finished int
	for i := range 100 {
		next := other[cur]
		oldLog := string(readBytes(t, filepath.Join(g, "APPROVALS.log")))
		if i%10 == 9 {
			fullUpdate(update(next, fmt.Sprintf("full %d", i))...)
		} else {
			cmd, _ := f.startSG(t, dir, update(next, fmt.Sprintf("kill %d", i))...)
			time.Sleep(time.Duration(rng.Int64N(int64(dur) + 1)))
			cmd.Process.Signal(syscall.SIGKILL)
			if exitCode(cmd) == 0 {
				finished++
			}
		}
		if r := f.sg(t, dir, nil, "golden", "verify", "--golden", g, "--suite", f.suite); r.code != 0 {
			t.Fatalf("kill %d: golden verify exit %d\n%s%s", i, r.code, r.stdout, r.stderr)
		}
		state := whichSet(t, g, sets)
		newLog := string(readBytes(t, filepath.Join(g, "APPROVALS.log")))
		if !strings.HasPrefix(newLog, oldLog) {
			t.Fatalf("kill %d: the approval log lost or changed earlier entries", i)
		}
		grown := logEntries(newLog) - logEntries(oldLog)
		switch {
		case state == next && grown == 1:
			after++
		case state == cur && grown == 0 && newLog == oldLog:
			before++
		default:
			t.Fatalf("kill %d: files are the %s set but the log grew by %d entries (from %s to %s)", i, state, grown, cur, next)
		}
		if stray := strayEntries(t, g); len(stray) > 0 {
			t.Fatalf("kill %d: after verify the golden directory still holds %v", i, stray)
		}
		cur = state
	}
	t.Logf("100 updates: %d left the old files, %d the new ones (%d killed updates had already finished); %d empty locks removed by hand", before, after, finished, emptyLocks)
	if emptyLocks > 0 {
		t.Errorf("%d killed updates left an empty lock", emptyLocks)
	}
	fullUpdate(update(other[cur], "after the kills")...)
	f.mustSG(t, dir, 0, "golden", "verify", "--golden", g, "--suite", f.suite)
}

// TestConcurrentGoldenUpdates starts two updates of one directory at once,
// from two different results, 12 times. Either one fails because the other
// holds the directory (or changed it since it planned) and the other's files
// are in place, or both succeed one after the other; never an interleaved
// set. A round that meets the known journal race below still has to leave a
// complete set; the test then ends skipped, naming the bug.
func TestConcurrentGoldenUpdates(t *testing.T) {
	f := fixture(t)
	sets := map[string]map[string]string{"base": f.recorded(t, f.baseRes), "cand": f.recorded(t, f.candRes), "cand2": f.recorded(t, f.cand2Res)}
	from := map[string]string{"base": f.baseRes, "cand": f.candRes, "cand2": f.cand2Res}
	dir := t.TempDir()
	g := filepath.Join(dir, "g")
	update := func(which string) []string {
		return []string{"golden", "update", "--suite", f.suite, "--golden", g, "--from", from[which], "--reason", "race " + which, "--who", "race-test"}
	}
	f.mustSG(t, dir, 0, update("base")...)
	outcomes := map[string]int{}
	cur := "base"
	for round := range 12 {
		var rivals []string
		for _, k := range []string{"base", "cand", "cand2"} {
			if k != cur {
				rivals = append(rivals, k)
			}
		}
		if round%2 == 1 {
			rivals[0], rivals[1] = rivals[1], rivals[0]
		}
		oldLog := string(readBytes(t, filepath.Join(g, "APPROVALS.log")))
		c1, o1 := f.startSG(t, dir, update(rivals[0])...)
		c2, o2 := f.startSG(t, dir, update(rivals[1])...)
		code1, code2 := exitCode(c1), exitCode(c2)
		state := whichSet(t, g, sets)
		grown := logEntries(string(readBytes(t, filepath.Join(g, "APPROVALS.log")))) - logEntries(oldLog)
		codes, outs := []int{code1, code2}, []string{o1.String(), o2.String()}
		wins, race := 0, false
		for k := range codes {
			switch {
			case codes[k] == 0:
				wins++
			case codes[k] == 2 && (strings.Contains(outs[k], "another golden update is running") || strings.Contains(outs[k], "changed since this update was planned")):
			case codes[k] == 2 && strings.Contains(outs[k], "finishing an interrupted golden update"):
				race = true // fixed: Recover takes the lock; kept to catch a regression
			default:
				t.Fatalf("round %d: update from %s exit %d:\n%s", round, rivals[k], codes[k], outs[k])
			}
		}
		ok := state == rivals[0] || state == rivals[1]
		switch {
		case !ok:
			t.Fatalf("round %d: the files are the %s set, neither rival's", round, state)
		case race && (grown == wins || grown == wins+1) && grown >= 1:
			outcomes["known bug: an update failed finishing the other's journal"]++
		case wins == 2 && grown == 2:
			outcomes["both succeeded in turn"]++
		case wins == 1 && grown == 1 && (code1 == 0) == (state == rivals[0]):
			outcomes["one refused"]++
		default:
			t.Fatalf("round %d: exits %d and %d, files of %s, log grew by %d\nfirst (%s):\n%s\nsecond (%s):\n%s",
				round, code1, code2, state, grown, rivals[0], o1, rivals[1], o2)
		}
		f.mustSG(t, dir, 0, "golden", "verify", "--golden", g, "--suite", f.suite)
		cur = state
	}
	t.Logf("12 races: %v", outcomes)
	if n := outcomes["known bug: an update failed finishing the other's journal"]; n > 0 {
		msg := fmt.Sprintf("known bug (seen in %d of 12 races; the files were never interleaved): golden.Recover runs without the directory lock (from PlanUpdate, Compare and Verify), so a second process finishes the lock holder's journal at the same time and one of them fails with \"finishing an interrupted golden update: remove .update-pending: no such file or directory\" instead of \"another golden update is running\"", n)
		t.Error(msg)
	}
}

// TestReportWriteSurvivesSIGKILL kills 'report' while it writes HTML and
// JUnit files at 30 seeded random moments: each target is then absent or
// complete (the bytes of an uninterrupted render), never partial.
func TestReportWriteSurvivesSIGKILL(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	f.mustSG(t, dir, 0, "report", "--verdict", f.verdict, "--html", "ref.html", "--junit", "ref.xml")
	ref := map[string][]byte{"r.html": readBytes(t, filepath.Join(dir, "ref.html")), "j.xml": readBytes(t, filepath.Join(dir, "ref.xml"))}
	args := []string{"report", "--verdict", f.verdict, "--html", "out/r.html", "--junit", "out/j.xml"}
	dur := medianDuration(3, func() { f.mustSG(t, dir, 0, args...) })
	rng := rand.New(rand.NewPCG(20261202, 11))
	complete, absent, leftovers := 0, 0, 0
	for i := range 30 {
		if err := os.RemoveAll(filepath.Join(dir, "out")); err != nil {
			t.Fatal(err)
		}
		cmd, _ := f.startSG(t, dir, args...)
		time.Sleep(time.Duration(rng.Int64N(int64(dur) + 1)))
		cmd.Process.Signal(syscall.SIGKILL)
		exitCode(cmd)
		for name, want := range ref {
			got, err := os.ReadFile(filepath.Join(dir, "out", name))
			switch {
			case os.IsNotExist(err):
				absent++
			case err != nil:
				t.Fatal(err)
			case !bytes.Equal(got, want):
				t.Fatalf("kill %d: out/%s is partial: %d bytes, a complete render has %d", i, name, len(got), len(want))
			default:
				complete++
			}
		}
		tmps, _ := filepath.Glob(filepath.Join(dir, "out", ".*.tmp-*"))
		leftovers += len(tmps)
	}
	t.Logf("30 kills within %v: %d targets complete, %d absent; killed writes left %d hidden temporaries beside the targets", dur, complete, absent, leftovers)
}

// TestEmptyLockIsTakenOver: SIGKILL between the lock's creation and the
// write of the owner's pid leaves an empty DIR/.update-lock (the crash test
// meets this state about once in ten kills). No process owns it, so the next
// update must take it over, as it does for a lock naming a dead process.
func TestEmptyLockIsTakenOver(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	g := goldenCopy(t, f, dir)
	writeFile(t, filepath.Join(dir, g, ".update-lock"), nil)
	f.mustSG(t, dir, 0, "golden", "update", "--suite", f.suite, "--golden", g, "--from", f.baseRes, "--reason", "after a crash", "--who", "crash-test")
	f.mustSG(t, dir, 0, "golden", "verify", "--golden", g, "--suite", f.suite)
}

package kernels

import (
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// A Team's helper really takes a region's jobs: two jobs that each wait for
// the other to start can only finish if they run at the same time.
func TestTeamRunsJobsAlongsideTheCaller(t *testing.T) {
	team := NewTeam(1)
	defer team.Close()
	for round := range 50 { // the helper, awake or asleep, joins every region
		var started atomic.Int32
		var timedOut atomic.Bool
		runJobs(team, 2, 2, func() func(int) {
			return func(int) {
				started.Add(1)
				deadline := time.Now().Add(5 * time.Second)
				for started.Load() < 2 {
					if time.Now().After(deadline) {
						timedOut.Store(true)
						return
					}
				}
			}
		})
		require.False(t, timedOut.Load(), "round %d: the two jobs did not run at once", round)
		require.NotNil(t, team.helpers[0], "the region ran on the team's helper")
		if round%10 == 9 {
			time.Sleep(2 * teamSpin) // let the helper fall asleep
		}
	}
}

// Every job runs exactly once whether the Team is free, busy with another
// goroutine's region (which then runs on fresh goroutines), too small for
// the workers asked, closed, or nil.
func TestTeamRunsEveryJobOnce(t *testing.T) {
	team := NewTeam(1)
	check := func(tm *Team, workers int) {
		const n = 37
		var ran [n]atomic.Int32
		runJobs(tm, n, workers, func() func(int) {
			return func(j int) { ran[j].Add(1) }
		})
		for j := range ran {
			require.EqualValues(t, 1, ran[j].Load(), "job %d", j)
		}
	}
	var wg sync.WaitGroup
	for range 8 { // concurrent regions contend for the one helper
		wg.Go(func() {
			for range 200 {
				check(team, 2)
			}
		})
	}
	wg.Wait()
	check(team, 3) // more workers than helpers
	check(nil, 2)
	team.Close()
	team.Close()
	check(team, 2)
	require.False(t, team.helping())
}

// Products through a Scratch with a Team are the bits of the same products
// without one, for single rows and blocks of rows, every weight layout's
// parallel path and the gathers.
func TestTeamKeepsTheBits(t *testing.T) {
	r := newTestRand(7)
	team := NewTeam(1)
	defer team.Close()
	sc := &Scratch{Team: team}
	for _, dt := range []DType{F32, F16} {
		w := randMat(r, dt, 300, 600)
		w.Panels = PackPanels(w)
		for _, m := range []int{1, 9} {
			x := make([]float32, m*600)
			for i := range x {
				x[i] = float32(r.NormFloat64())
			}
			want, got := make([]float32, m*300), make([]float32, m*300)
			Linear(want, x, m, w, nil, 2)
			sc.Linear(got, x, m, w, nil, 2)
			require.Equal(t, want, got, "%v m=%d", dt, m)
		}
		x := make([]float32, 600)
		for i := range x {
			x[i] = float32(r.NormFloat64())
		}
		var idx []int32 // whole panels and single rows
		for j := int32(0); j < 300; j++ {
			if j < 64 || j%3 == 0 {
				idx = append(idx, j)
			}
		}
		want, got := make([]float32, len(idx)), make([]float32, len(idx))
		LinearGather(want, x, w, nil, idx)
		sc.LinearGatherParallel(got, x, w, nil, idx, 2)
		require.Equal(t, want, got, "%v gather", dt)
	}
}

package runner

import (
	"fmt"
	"sync"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

// forEach reports the failure a one-lane run would meet first (the lowest
// failing index), however many lanes run and whichever finishes first, and
// every index below it runs.
func TestForEachReportsTheLowestFailure(t *testing.T) {
	for _, nl := range []int{1, 2, 3, 8} {
		ls := make([]lane, nl)
		var mu sync.Mutex
		ran := map[int]bool{}
		err := forEach(ls, 40, func(_ lane, i int) error {
			if i == 9 {
				return fmt.Errorf("index %d", i) // fails at once
			}
			if i == 7 {
				time.Sleep(20 * time.Millisecond) // fails late, but lower
				return fmt.Errorf("index %d", i)
			}
			mu.Lock()
			ran[i] = true
			mu.Unlock()
			return nil
		})
		require.EqualError(t, err, "index 7", "%d lanes", nl)
		for i := 0; i < 7; i++ {
			require.True(t, ran[i], "%d lanes: index %d below the failure did not run", nl, i)
		}
	}
	ls := make([]lane, 3)
	var mu sync.Mutex
	count := 0
	require.NoError(t, forEach(ls, 100, func(lane, int) error {
		mu.Lock()
		count++
		mu.Unlock()
		return nil
	}))
	require.Equal(t, 100, count, "every index runs exactly once")
}

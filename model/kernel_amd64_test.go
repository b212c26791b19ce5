//go:build !purego

package model

func init() {
	noPrefetch = func() func() {
		old := prefetchDistance
		prefetchDistance = 0
		return func() { prefetchDistance = old }
	}
}

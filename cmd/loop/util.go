package main

import (
	"sort"

	"handoff"
)

// sortBy sorts xs stably by less.
func sortBy[T any](xs []T, less func(a, b T) bool) {
	sort.SliceStable(xs, func(i, j int) bool { return less(xs[i], xs[j]) })
}

// cbKeys returns the class keys of the project's codebook.
func cbKeys(s interface{ Codebook() handoff.Codebook }) []string {
	cb := s.Codebook()
	return cb.Keys()
}

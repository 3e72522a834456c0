package cohort

import (
	"maps"
	"slices"
)

// sortedKeys returns the keys of m in increasing order.
func sortedKeys[V any](m map[string]V) []string { return slices.Sorted(maps.Keys(m)) }

func sortedStrings(v []string) []string {
	out := append([]string(nil), v...)
	slices.Sort(out)
	return out
}

package tracker

import (
	"cmp"
	"slices"
)

func sortStats(s []CommunityStats) {
	slices.SortFunc(s, func(a, b CommunityStats) int { return cmp.Compare(a.ID, b.ID) })
}

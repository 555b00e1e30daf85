package choose_test

import (
	"fmt"

	"tilebench/vision/stats"
	"tilebench/vision/stats/choose"
)

func ExampleParetoFront() {
	pts := []choose.Point{{Cost: 1, Score: 5}, {Cost: 2, Score: 4}, {Cost: 3, Score: 7}, {Cost: 4, Score: 7}, {Cost: 5, Score: 9}}
	fmt.Println(choose.ParetoFront(pts))
	// Output: [0 2 4]
}

func ExampleRecommender() {
	cands := []choose.Candidate{
		// Normalised scores (0 the floor policy, 1 the reference) on the
		// same eight seeds: seed i is index i in every candidate.
		{Name: "patch 16", Cost: 0.4, Scores: stats.Strata{{0.41, 0.35, 0.5, 0.42, 0.38, 0.47, 0.4, 0.44}}},
		{Name: "patch 8", Cost: 1.5, Scores: stats.Strata{{0.99, 0.9, 1.08, 0.99, 0.95, 1.03, 0.97, 1.01}}},
		{Name: "patch 4", Cost: 6.0, Scores: stats.Strata{{1, 0.9, 1.1, 1, 0.95, 1.05, 0.98, 1.02}}},
	}
	// Margin 0 means choose.DefaultMargin, 0.05 of the normalised scale.
	ch, err := choose.Recommender{Bootstrap: stats.Bootstrap{Seed: 7}}.Recommend(cands)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("best:", cands[ch.Best].Name, "pick:", cands[ch.Pick].Name)
	// Output: best: patch 4 pick: patch 8
}

package drive

import "tilebench/games"

// floors are the documented baseline returns of the default game (see
// docs/games.md and TestFloors, which measures them again): the mean
// return of the zero action and of uniformly random actions over
// held-out seeds 0..floorEpisodes−1.
var floors = games.Floors{Idle: 0, Random: 7.70}

// floorEpisodes is how many held-out seeds the floors are measured on.
const floorEpisodes = 100

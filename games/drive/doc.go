// Package drive is the top-down driving game: a car on a closed circuit
// generated from the seed, seen from above in a view that turns with it.
//
// The circuit is a uniform Catmull–Rom spline (Catmull & Rom 1974) through
// jittered control points around a centre; circuits that cross themselves,
// crowd themselves or bend tighter than TrackConfig.MinRadius are drawn
// again. The car is the kinematic bicycle model (Rajamani, Vehicle Dynamics
// and Control, §2.2) stepped every DT seconds, in metres and seconds.
//
// Actions: steer ∈ [−1,1], throttle ∈ [0,1], brake ∈ [0,1] (clamped).
// Reward: centreline progress scaled so one lap is worth LapReward, minus
// StepCost per step. The episode ends on a lap (games.Completed), after
// more than OffRoadLimit steps off the road (games.Failed) or at MaxSteps
// (games.TimeUp).
//
// The world is rasterised once per episode (golang.org/x/image/vector);
// Render only samples it, heading up, the car below the frame's centre.
// Variations (Variations) change the palette, the road width, scatter
// shapes, texture the ground and change the frame size. The scripted
// expert (Game.Expert) is pure pursuit (Coulter 1992) with a speed plan
// from the curvature ahead.
package drive

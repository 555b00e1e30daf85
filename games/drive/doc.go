// Package drive is the top-down driving game: a car on a closed circuit
// generated from the seed, seen from above in a landscape view that turns
// with it.
//
// A circuit is a chain of straights and constant-radius bends: five or
// six bends (more, some turning the other way, in the harder family)
// whose turning angles add up to one full turn, each followed by a
// straight; all straights but two are drawn at random and those two are
// solved for so that the chain closes on its start line. Layouts that
// come too close to themselves (which also rules out crossings), bend
// tighter than TrackConfig.MinRadius or outgrow TrackConfig.Extent are
// drawn again. The road's width swings slowly round the lap. The car is
// the kinematic bicycle model (Rajamani, Vehicle Dynamics and Control,
// §2.2) stepped every DT seconds, in metres and seconds.
//
// Actions: steering ∈ [−1,1] and pedal ∈ [−1,1] (positive drives,
// negative brakes; both clamped). Reward: the signed metres of
// centreline progress of each step, less OffRoadPenalty per simulated
// second with the car's centre off the road. The episode ends when a
// lap's distance is done (games.Completed), when the car's centre has
// spent more than OffRoadAllowance seconds in all off the road
// (games.Failed), or at TimeLimit seconds (games.TimeUp).
//
// The frame's centre lies ViewLead metres ahead of the car, which is
// drawn near the middle of the frame pointing up. The world image is a
// buffer sized once per game; each stretch of road is drawn into it when
// a frame first reaches it, and Reset restores only the pixels the last
// episode wrote, so starting an episode costs little and allocates
// nothing. Render only samples the world image. Variations (Variations)
// change the palette, the road width, the circuit family, scatter
// shapes, texture the ground and change the frame size. The scripted
// expert (Game.Expert) is pure pursuit (Coulter 1992) with a speed plan
// from the curvature ahead.
package drive

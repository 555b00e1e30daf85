// Package paddle is the paddle game: an 84×84 field closed by walls on the
// left, right and top, lit by faint arcs, where the agent slides a paddle
// along the bottom to keep a ball in play.
//
// The ball moves at constant speed between hits and reflects off the walls
// by the law of reflection (the normal component of its velocity reverses,
// speed kept). It leaves the paddle at an angle from vertical proportional
// to where it hit, up to Config.MaxAngle, and each return makes it faster
// by Config.SpeedUp up to Config.MaxSpeed. Reward: +1 for each return, −1
// for each miss; a miss serves a new ball at the starting speed. The
// episode ends after Config.MissLimit misses (games.Failed) or at the step
// limit (games.TimeUp).
//
// Actions: discrete left / stay / right (0, 1, 2) in the default game; the
// "analog" variation takes one continuous velocity in [−1, 1]. The other
// variations change the palette, ball and paddle size, speed, and add a
// drifting obstacle; join them with "+".
package paddle

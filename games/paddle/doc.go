// Package paddle is the paddle game: a 120×80 field between two rails,
// where the agent slides a paddle along a curved track on the right to
// keep a ball in play and send it out through a gate that drifts up and
// down the far wall on the left.
//
// The ball moves at constant speed between hits and reflects off the
// rails, the far wall outside the gate and the optional post by the law of
// reflection (the normal component of its velocity reverses, speed kept).
// The track is an arc of a circle about a point mid-field; a ball that
// meets the paddle there leaves along the track's inward normal turned by
// up to Config.MaxAngle towards the end of the paddle it hit, and each
// return makes it faster by Config.SpeedUp up to Config.MaxSpeed. A ball
// that crosses the track where the paddle is not is lost.
//
// Scores: GoalPoints for a ball out through the gate, LostPoints for a
// lost ball, and k·RallyPoints for the k-th return of one ball (up to
// RallyCap). Each goal or loss serves the next ball from near the far
// wall; the episode completes when Config.Balls balls have been played
// (games.Completed), or ends at the step limit (games.TimeUp).
//
// Actions: discrete up / stay / down (0, 1, 2) along the track in the
// default game; the "analog" variation takes one continuous slide
// velocity in [−1, 1]. The other variations change the palette, ball and
// paddle size, speed and gate, and add a drifting post; join them with
// "+".
package paddle

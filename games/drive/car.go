package drive

import "math"

// CarParams are the physical constants of the car, in SI units. The zero
// value gives the default car.
type CarParams struct {
	// Wheelbase L is the distance between the axles in metres. Default 2.6.
	Wheelbase float64
	// MaxSteer is the steering limit δmax in radians (front wheel angle at
	// full lock, steer = ±1). Default 0.5.
	MaxSteer float64
	// MaxAccel is the acceleration at full throttle in m/s². Default 4.
	MaxAccel float64
	// MaxBrake is the deceleration at full brake in m/s². Default 8.
	MaxBrake float64
	// Rolling is the constant rolling-resistance deceleration in m/s²
	// while moving (c_rr·g with c_rr ≈ 0.015). Default 0.15; a negative
	// value means none.
	Rolling float64
	// Drag is the quadratic drag coefficient k in 1/m (deceleration k·v²).
	// Default 0.004, which caps the speed near 31 m/s; negative means none.
	Drag float64
	// Grip caps the lateral acceleration v²·κ in m/s², standing in for
	// tyre grip: at speed the path curvature is limited to Grip/v². It
	// does not bind at low speed. Default 7; negative means no cap.
	Grip float64
	// Length and Width are the body size in metres (drawing and the
	// off-road test only). Defaults 4.2 and 1.8.
	Length, Width float64
}

// orDefault sets *v to d if it is zero; with none it also turns a
// negative *v into 0 ("switched off").
func orDefault(v *float64, d float64, none bool) {
	if *v == 0 {
		*v = d
	} else if none && *v < 0 {
		*v = 0
	}
}

func (p CarParams) withDefaults() CarParams {
	def := func(v *float64, d float64) { orDefault(v, d, true) }
	def(&p.Wheelbase, 2.6)
	def(&p.MaxSteer, 0.5)
	def(&p.MaxAccel, 4)
	def(&p.MaxBrake, 8)
	def(&p.Rolling, 0.15)
	def(&p.Drag, 0.004)
	def(&p.Grip, 7)
	def(&p.Length, 4.2)
	def(&p.Width, 1.8)
	return p
}

// Car is the kinematic bicycle model with the reference point at the
// centre of the rear axle (Rajamani, Vehicle Dynamics and Control, §2.2,
// with l_r = 0 so the slip angle β vanishes at the reference point):
//
//	ẋ = v cos ψ,  ẏ = v sin ψ,  ψ̇ = v tan δ / L,  v̇ = a
type Car struct {
	P CarParams
	// Pos is the rear-axle centre (m); Heading ψ (rad, anticlockwise from
	// +x); Speed v (m/s, never negative); Steer the front wheel angle δ
	// applied at the last step (rad).
	Pos     Vec
	Heading float64
	Speed   float64
	Steer   float64
}

// NewCar returns a car with params p (defaults filled in) at rest.
func NewCar(p CarParams) Car { return Car{P: p.withDefaults()} }

// Centre is the middle of the body (half a wheelbase ahead of the rear
// axle).
func (c *Car) Centre() Vec {
	h := c.P.Wheelbase / 2
	return Vec{c.Pos.X + h*math.Cos(c.Heading), c.Pos.Y + h*math.Sin(c.Heading)}
}

// Advance moves the car one time step dt with steer and pedal ∈ [−1,1]
// (already clamped by the caller): a positive pedal is that fraction of
// MaxAccel, a negative one that fraction of MaxBrake. It returns the
// distance driven.
//
// The acceleration is held constant over the step and integrated
// exactly (stopping at v = 0 inside the step if braking ends there); the
// path over the step is the exact circular arc of curvature tan δ / L
// (capped by Grip) for the distance driven, so a steady turn traces a
// circle of radius L / tan δ with no integration drift.
func (c *Car) Advance(steer, pedal, dt float64) float64 {
	throttle, brake := math.Max(pedal, 0), math.Max(-pedal, 0)
	p := &c.P
	delta := steer * p.MaxSteer
	c.Steer = delta
	v := c.Speed
	a := throttle*p.MaxAccel - p.Drag*v*v
	dec := brake * p.MaxBrake
	if v > 0 {
		dec += p.Rolling
	}
	a -= dec
	var dist float64
	nv := v + a*dt
	if nv < 0 {
		// Stops inside the step: time to stop v/|a|, distance v²/(2|a|).
		if a < 0 {
			dist = v * v / (-2 * a)
		}
		nv = 0
	} else {
		dist = (v + nv) / 2 * dt
	}
	c.Speed = nv
	if dist == 0 {
		return 0
	}
	kappa := math.Tan(delta) / p.Wheelbase
	if p.Grip > 0 {
		vm := math.Max(v, nv)
		if lim := p.Grip / (vm * vm); math.Abs(kappa) > lim {
			kappa = math.Copysign(lim, kappa)
		}
	}
	psi := c.Heading
	if math.Abs(kappa*dist) < 1e-9 {
		c.Pos.X += dist * math.Cos(psi)
		c.Pos.Y += dist * math.Sin(psi)
	} else {
		npsi := psi + kappa*dist
		c.Pos.X += (math.Sin(npsi) - math.Sin(psi)) / kappa
		c.Pos.Y += (math.Cos(psi) - math.Cos(npsi)) / kappa
		c.Heading = wrapAngle(npsi)
	}
	return dist
}

// wrapAngle maps a to (−π, π].
func wrapAngle(a float64) float64 {
	a = math.Mod(a+math.Pi, 2*math.Pi)
	if a <= 0 {
		a += 2 * math.Pi
	}
	return a - math.Pi
}

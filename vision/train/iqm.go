package train

import "time"

func secondsToDuration(s float64) time.Duration { return time.Duration(s * float64(time.Second)) }

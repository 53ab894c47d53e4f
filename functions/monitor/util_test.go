package monitor

import "strconv"

func ftoa(x float64) string { return strconv.FormatFloat(x, 'f', 2, 64) }

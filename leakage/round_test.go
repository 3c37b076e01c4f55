package leakage

import (
	"math"
	"math/rand/v2"
	"testing"
)


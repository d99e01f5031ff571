package timeline_test

import (
	"testing"

	"bandfold/cmd/bandfold/internal/jobtest"
)

func TestMain(m *testing.M) { jobtest.Main(m) }

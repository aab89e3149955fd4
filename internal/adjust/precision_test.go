package adjust

import (
	"testing"

	"cairn/internal/standards"
	"cairn/internal/units"
)

func TestPublishDecimals(t *testing.T) {
	// Half the loop constants of FGCC 1984 §3.5 (standards package): 2, 2.5,
	// 3, 4 and 6 mm. 0.01 ft = 3.048 mm (0.3048 m exactly, Federal Register
	// 85 FR 62698), so feet go to 0.001 ft up to second order class I.
	tests := []struct {
		class standards.Class
		unit  units.Unit
		want  int
	}{
		{standards.FirstI, units.Metre, 3},
		{standards.Third, units.Metre, 3},
		{standards.FirstI, units.Foot, 3},
		{standards.SecondI, units.USSurveyFoot, 3},
		{standards.SecondII, units.Foot, 2},
		{standards.Third, units.USSurveyFoot, 2},
		{"", units.Metre, 3},
		{"", units.Foot, 2},
	}
	for _, tt := range tests {
		if got := PublishDecimals(tt.class, tt.unit); got != tt.want {
			t.Errorf("PublishDecimals(%q, %s) = %d, want %d", tt.class, tt.unit, got, tt.want)
		}
	}
}

package api_test

import (
	"testing"
	"time"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"

	"sluice/pkg/api"
)

func TestParseDuration(t *testing.T) {
	tests := []struct {
		in   string
		want time.Duration
	}{
		{"30m", 30 * time.Minute},
		{"2h", 2 * time.Hour},
		{"3d", 72 * time.Hour},
		{"1d12h", 36 * time.Hour},
		{"1w", 7 * 24 * time.Hour},
		{"1.5d", 36 * time.Hour},
		{"2w1d", 15 * 24 * time.Hour},
		{"1d30m", 24*time.Hour + 30*time.Minute},
		{"72h", 72 * time.Hour},
	}
	for _, tt := range tests {
		got, err := api.ParseDuration(tt.in)
		require.NoError(t, err, tt.in)
		assert.Equal(t, tt.want, got, tt.in)
	}
	for _, bad := range []string{"", "d", "3x", "3 days", "-", "1d2", "h3"} {
		_, err := api.ParseDuration(bad)
		assert.Error(t, err, "%q", bad)
	}
}

func TestFormatDuration(t *testing.T) {
	for d, want := range map[time.Duration]string{
		2 * time.Hour:                 "2h",
		90 * time.Minute:              "1h30m",
		72 * time.Hour:                "3d",
		36 * time.Hour:                "1d12h",
		24*time.Hour + 45*time.Second: "1d45s",
	} {
		assert.Equal(t, want, api.FormatDuration(d))
		back, err := api.ParseDuration(want)
		require.NoError(t, err)
		assert.Equal(t, d, back)
	}
}

package kernel

import (
	"fmt"
	"os"
	"path/filepath"
)

// The ECharts build that charts are drawn with, pinned by size and SHA-256
// of dist/echarts.min.js in the npm package echarts@5.6.0 (Apache-2.0).
const (
	EChartsVersion = "5.6.0"
	EChartsSize    = 1034102
	EChartsSHA256  = "bf4a223524e40b77c304bec67e1222cf551f14880cf42c69dc046558e11c07b1"
)

// EChartsEnv names the environment variable holding the path of a local
// echarts.min.js; it overrides the copy placed by `counterpart setup`.
const EChartsEnv = "COUNTERPART_ECHARTS"

// CacheDir is the folder where setup keeps what it builds and downloads:
// os.UserCacheDir()/counterpart (XDG_CACHE_HOME is honoured on Linux).
func CacheDir() (string, error) {
	base, err := os.UserCacheDir()
	if err != nil {
		return "", fmt.Errorf("no cache folder: %w (set XDG_CACHE_HOME or HOME)", err)
	}
	return filepath.Join(base, "counterpart"), nil
}

// EChartsCachePath is where setup places echarts.min.js.
func EChartsCachePath() (string, error) {
	dir, err := CacheDir()
	if err != nil {
		return "", err
	}
	return filepath.Join(dir, "echarts", EChartsVersion, "echarts.min.js"), nil
}

// EChartsPath returns the library's path: COUNTERPART_ECHARTS when set,
// otherwise the cache location used by setup. The file may not exist.
func EChartsPath() (string, error) {
	if p := os.Getenv(EChartsEnv); p != "" {
		return p, nil
	}
	return EChartsCachePath()
}

// EChartsJS reads the ECharts library (see EChartsPath).
func EChartsJS() ([]byte, error) {
	p, err := EChartsPath()
	if err != nil {
		return nil, err
	}
	js, err := os.ReadFile(p)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("ECharts library not found at %s: run `counterpart setup` (or set %s to an echarts.min.js)", p, EChartsEnv)
		}
		return nil, fmt.Errorf("reading the ECharts library: %w", err)
	}
	if len(js) == 0 {
		return nil, fmt.Errorf("ECharts library at %s is empty: run `counterpart setup` again", p)
	}
	return js, nil
}

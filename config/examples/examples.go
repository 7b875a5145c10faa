// Package examples holds the example profiles shipped with packwatch, so the
// demo runs from any directory.
package examples

import _ "embed"

// BuoyWinch is the profile of the invented 12-cell winch pack of an offshore
// survey buoy (buoy-winch.toml), the demo's pack.
//
//go:embed buoy-winch.toml
var BuoyWinch []byte

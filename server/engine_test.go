package server

import "packwatch/pack"

// The real engine provides what the server declares it needs.
var (
	_ Engine    = (*pack.Engine)(nil)
	_ BusViewer = (*pack.Engine)(nil)
)

// Package web holds the dashboard's page: the html/template files in
// templates/ and the static assets in static/ (stylesheet, script, the
// vendored chart library with its licence), embedded into the binary so the
// page works offline with no CDN. The server package serves them.
package web

import "embed"

// Templates holds templates/*.html, parsed by the server with html/template.
//
//go:embed templates
var Templates embed.FS

// Static holds the files under static/, served as /static/.
//
//go:embed static
var Static embed.FS

package config

// Pos is a place in a profile file, 1-based.
type Pos struct {
	Line, Col int
}

// positions maps a key path such as "frame[1].field[0].bind" to where the key
// stands in the file.
type positions map[string]Pos

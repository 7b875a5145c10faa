//go:build !linux

package bus

// ListCANInterfaces returns nothing: SocketCAN exists only on Linux.
func ListCANInterfaces() ([]CANInterface, error) { return nil, nil }

func canKernelNote() string { return "" }

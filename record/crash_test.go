package record

const crashChildEnv = "PACKWATCH_RECORD_CRASH_CHILD"

func crashChild() int { return 0 }

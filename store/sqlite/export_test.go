package sqlite

// MigrationCount is the number of embedded migrations (versions may skip
// numbers while branches that add migrations are merged).
func MigrationCount() int {
	ms, err := migrations()
	if err != nil {
		panic(err)
	}
	return len(ms)
}

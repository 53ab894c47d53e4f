package atomicfile_test

import (
	"fmt"
	"os"
	"path/filepath"

	"veer/internal/atomicfile"
)

func Example() {
	dir, _ := os.MkdirTemp("", "atomicfile-example-")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "sbp.json")

	// Replace a file: readers see the old content or the new, never half.
	if err := atomicfile.WriteFile(path, []byte(`{"version":1}`), 0o600); err != nil {
		fmt.Println(err)
	}

	// Stream a large output, and drop it if producing it fails.
	f, err := atomicfile.New(path, 0o600)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer f.Abort() // does nothing after Commit
	fmt.Fprint(f, `{"version":2}`)
	if err := f.Commit(); err != nil {
		fmt.Println(err)
	}
	b, _ := os.ReadFile(path)
	fmt.Println(string(b))

	// Create refuses to replace a file that exists.
	err = atomicfile.Create(path, []byte(`{"version":3}`), 0o600)
	fmt.Println(err != nil)
	// Output:
	// {"version":2}
	// true
}

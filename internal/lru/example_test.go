package lru_test

import (
	"fmt"

	"veer/internal/lru"
)

func Example() {
	// At most 2 entries and 1 MiB of documents.
	docs := lru.New[string, []byte](2, 1<<20)
	docs.Put("sbp@v1", []byte(`{"v":1}`), 7)
	docs.Put("sbp@v2", []byte(`{"v":2}`), 7)
	docs.Get("sbp@v1")                        // sbp@v1 is now the most recent
	docs.Put("fev1@v1", []byte(`{"v":1}`), 7) // drops sbp@v2, the least recently used
	_, ok := docs.Get("sbp@v2")
	fmt.Println(docs.Len(), ok)
	// Output: 2 false
}

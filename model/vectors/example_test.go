package vectors_test

import (
	"fmt"
	"os"
	"strings"

	"convtag/model/vectors"
)

func Example() {
	in := "3 2\nferry 1 0\nlaunch 0.9 0.1\nquay 0 1\n"
	s, err := vectors.Read(strings.NewReader(in))
	if err != nil {
		fmt.Println(err)
		return
	}
	near, _ := s.Nearest("ferry", 2)
	for _, n := range near {
		fmt.Printf("%s %.3f\n", n.Word, n.Similarity)
	}
	s.WriteText(os.Stdout)
	// Output:
	// launch 0.994
	// quay 0.000
	// 3 2
	// ferry 1 0
	// launch 0.9 0.1
	// quay 0 1
}

func ExampleRead_error() {
	_, err := vectors.Read(strings.NewReader("2 3\nferry 1 2 3\nquay 1 2\n"))
	fmt.Println(err)
	// Output: vectors: line 3: wrong number of values: "quay" has 2 values, want 3
}

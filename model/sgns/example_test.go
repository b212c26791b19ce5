package sgns_test

import (
	"context"
	"fmt"

	"convtag/model/sgns"
)

func ExampleTrain() {
	corpus := sgns.Texts{
		"the ferry to Kelpholm is delayed",
		"the launch to Kelpholm is delayed",
		"the ferry to Saltery is cancelled",
		"the launch to Saltery is cancelled",
	}
	res, err := sgns.Train(context.Background(), corpus, sgns.Options{Dim: 8, MinCount: 2, Epochs: 1, Jobs: 1})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(res.Vectors.Len(), "words of dimension", res.Vectors.Dim)
	fmt.Println(res.Vectors.Words[:3], res.Counts[:3])
	// Output:
	// 9 words of dimension 8
	// [is the to] [4 4 4]
}

package model

import "testing"

func TestCheckNoDuplicateKeys(t *testing.T) {
	tests := []struct {
		in  string
		dup bool
	}{
		{`{"a":1,"b":{"a":2},"c":[{"a":1},{"a":1}]}`, false},
		{`{"a":1,"a":2}`, true},
		{`{"a":{"b":1,"b":1}}`, true},
		{`[{"x":"a","x":"b"}]`, true},
		{`{"a":"b","b":"a"}`, false},
		{`{"a":[],"b":{},"c":[[{"d":1}]],"d":null}`, false},
		{`{"a":[{"k":1}],"a":0}`, true},
		{`"just a string"`, false},
	}
	for _, tt := range tests {
		err := checkNoDuplicateKeys([]byte(tt.in))
		if (err != nil) != tt.dup {
			t.Errorf("%s: error %v, want duplicate %t", tt.in, err, tt.dup)
		}
	}
}

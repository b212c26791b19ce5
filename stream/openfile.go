package stream

import "io"

// decoded is an opened input as an io.ReadCloser.
type decoded struct{ in *input }

func (d decoded) Read(p []byte) (int, error) { return d.in.r.Read(p) }
func (d decoded) Close() error               { d.in.closer(); return nil }

// Open opens the file at name ("-" is stdin, which Close leaves open) and
// returns its bytes as every input of this package is read: gzip, zstd and
// bzip2 recognised from the first bytes and decoded (several members or
// frames as one stream), a leading UTF-8 byte-order mark dropped. It is for
// side inputs that are not records, such as a word-vector file.
func Open(name string, stdin io.Reader) (io.ReadCloser, error) {
	in, err := openInput(name, stdin, nil)
	if err != nil {
		return nil, err
	}
	return decoded{in}, nil
}

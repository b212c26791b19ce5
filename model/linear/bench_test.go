package linear

import "testing"

func BenchmarkFit(b *testing.B) {
	docs, y := ferryCorpus(2000, 9)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Fit(docs, y, len(ferryLabels), Options{C: 3}); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(len(docs)*b.N)/b.Elapsed().Seconds(), "records/s")
}

func BenchmarkPredict(b *testing.B) {
	docs, y := ferryCorpus(2000, 9)
	m, err := Fit(docs, y, len(ferryLabels), Options{C: 3})
	if err != nil {
		b.Fatal(err)
	}
	p := m.NewPredictor()
	var bytes int64
	for _, d := range docs {
		for _, t := range d {
			bytes += int64(len(t)) + 1
		}
	}
	b.SetBytes(bytes / int64(len(docs)))
	b.ReportAllocs()
	i := 0
	for b.Loop() {
		p.Probs(docs[i])
		i = (i + 1) % len(docs)
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "records/s")
}

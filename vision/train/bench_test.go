package train

import (
	"context"
	"testing"

	_ "tilebench/games/drive"
)

// benchTrainer builds a trainer with one round of collected data.
func benchTrainer(b *testing.B, game, method string, workers int) *Trainer {
	b.Helper()
	tr, err := New(Config{Game: game, Method: method, Workers: workers, ValEpisodes: 1, FitnessEpisodes: 1, Iters: 1, Seed: 1})
	if err != nil {
		b.Fatal(err)
	}
	return tr
}

// BenchmarkCloneEpochDrive: one behaviour-cloning epoch over the data of
// one DAgger round (4 expert episodes) on drive, attention at patch 8.
func BenchmarkCloneEpochDrive1(b *testing.B) { benchCloneEpoch(b, "drive", 1) }
func BenchmarkCloneEpochDrive2(b *testing.B) { benchCloneEpoch(b, "drive", 2) }

func benchCloneEpoch(b *testing.B, game string, workers int) {
	tr := benchTrainer(b, game, Clone, workers)
	tr.cfg.Clone.Epochs = 1
	tr.cfg.ValEpisodes = 1
	if _, err := tr.Run(context.Background(), nil, 0, nil); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := tr.epoch(context.Background(), 1, i); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(tr.ds.n), "samples/epoch")
}

// BenchmarkESGenDrive: one ES generation (16 antithetic pairs, one
// fitness episode each) on drive, attention at patch 8.
func BenchmarkESGenDrive1(b *testing.B) { benchESGen(b, "drive", 1) }
func BenchmarkESGenDrive2(b *testing.B) { benchESGen(b, "drive", 2) }

func benchESGen(b *testing.B, game string, workers int) {
	tr := benchTrainer(b, game, ESm, workers)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := tr.es.Step(context.Background(), tr.fitness); err != nil {
			b.Fatal(err)
		}
	}
}

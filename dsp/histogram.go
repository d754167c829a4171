package dsp

import "math"

// Histogram bins: 0.1 dB wide and centred on the 0.1 dB grid; bin k holds levels in
// [k/10 - 0.05, k/10 + 0.05) dB and stands for the level k/10, so a steady level of 45.00 dB falls
// in bin 450 and reads 45.0 (bin 450 holds 44.95 up to 45.05). The range covers -50 dB to
// 200 dB; levels outside it are counted in the first or last bin.
//
// Earlier builds used bins that started on the grid (bin k held [k/10, (k+1)/10) and read
// k/10 + 0.05), so a steady level read 0.05 dB off; package buffer converts the histograms of
// minute records stored in that layout (record version 1) when it reads them.
const (
	HistogramBinWidth = 0.1
	histogramFirstBin = -500
	histogramBins     = 2500
)

// Histogram counts level samples in 0.1 dB bins. Histograms of consecutive intervals merge
// exactly (Merge), so percentile levels over any period are exact to the bin, whatever the
// intervals they were recorded in. The zero value is an empty histogram; it holds its bins in a
// fixed array and never allocates.
type Histogram struct {
	counts [histogramBins]uint32
	total  uint64
}

// Add counts one level sample (dB). Non-finite levels below the range (digital silence, -Inf)
// go to the first bin; NaN is ignored.
func (h *Histogram) Add(level float64) {
	if level != level {
		return
	}
	k := math.Floor(level*10 + 0.5) // 1/HistogramBinWidth = 10
	i := 0
	switch {
	case k >= histogramFirstBin+histogramBins-1:
		i = histogramBins - 1
	case k > histogramFirstBin:
		i = int(k) - histogramFirstBin
	}
	h.counts[i]++
	h.total++
}

// Count returns the number of level samples counted.
func (h *Histogram) Count() uint64 { return h.total }

// Reset empties the histogram.
func (h *Histogram) Reset() { *h = Histogram{} }

// Merge adds the counts of o to h.
func (h *Histogram) Merge(o *Histogram) {
	if o.total == 0 {
		return
	}
	for i, c := range o.counts {
		h.counts[i] += c
	}
	h.total += o.total
}

// Span returns the bins between the first and the last non-empty one: first is the bin number k
// of counts[0] (bin k holds levels in [k/10 - 0.05, k/10 + 0.05) dB). The slice aliases h's storage and is
// valid until h changes. An empty histogram returns (0, nil).
func (h *Histogram) Span() (first int32, counts []uint32) {
	if h.total == 0 {
		return 0, nil
	}
	lo, hi := 0, histogramBins-1
	for h.counts[lo] == 0 {
		lo++
	}
	for h.counts[hi] == 0 {
		hi--
	}
	return int32(lo + histogramFirstBin), h.counts[lo : hi+1]
}

// AddSpan adds bins in the form Span returns: counts[i] is the count of bin first+i.
// Bins outside the histogram's range are folded into its first or last bin.
func (h *Histogram) AddSpan(first int32, counts []uint32) {
	for i, c := range counts {
		k := int(first) + i - histogramFirstBin
		k = min(max(k, 0), histogramBins-1)
		h.counts[k] += c
		h.total += uint64(c)
	}
}

// Exceeded returns the percentile level LN: the level exceeded for n percent of the samples
// (ISO 1996-1:2016, "N percent exceedance level"; 0 < n < 100), reported as the centre of the
// 0.1 dB bin that holds it. With the samples sorted from loudest, it is the sample of rank
// ⌈n/100 · count⌉ (at least 1). Bin k is reported as k/10 dB, the level at its centre, so a
// steady level reads itself to the 0.1 dB. An empty histogram gives NaN.
func (h *Histogram) Exceeded(n float64) float64 {
	if h.total == 0 {
		return math.NaN()
	}
	rank := uint64(math.Ceil(n / 100 * float64(h.total) * (1 - 1e-12)))
	rank = max(rank, 1)
	var cum uint64
	for i := histogramBins - 1; i >= 0; i-- {
		cum += uint64(h.counts[i])
		if cum >= rank {
			return float64(i+histogramFirstBin) / 10
		}
	}
	return float64(histogramFirstBin) / 10
}

package dsp

import (
	"errors"
	"fmt"
	"math"
	"math/cmplx"

	"github.com/leqnode/leqnode/dsp/reference"
)

// BandSet selects the bandwidth of a filter bank. Its value is the bandwidth designator b of
// IEC 61260-1:2014: the number of bands per octave.
type BandSet int

const (
	// Octave selects octave bands (b = 1), from 16 Hz.
	Octave BandSet = 1
	// Third selects one-third-octave bands (b = 3), from 12.5 Hz.
	Third BandSet = 3
)

// String returns "octave", "third" or "BandSet(N)".
func (s BandSet) String() string {
	switch s {
	case Octave:
		return "octave"
	case Third:
		return "third"
	}
	return fmt.Sprintf("BandSet(%d)", int(s))
}

// lowest band number of each set: 12.5 Hz for one-third octaves, 16 Hz for octaves.
func (s BandSet) lowest() int {
	if s == Octave {
		return -6
	}
	return -19
}

// Band is one band of a filter bank, with its exact frequencies from IEC 61260-1:2014.
type Band struct {
	// X is the band number: the exact midband frequency is 1000·G^(X/b) Hz with
	// G = 10^(3/10) (Eq. 2); 0 is the 1 kHz band.
	X int

	// Nominal is the nominal midband frequency in Hz as Annex E writes it: "12.5", "31.5",
	// "1000", "1250", "20000". It names the band in records and payloads.
	Nominal string

	// Mid is the exact midband frequency fm, and Lower and Upper the exact band-edge
	// frequencies fm·G^(∓1/(2b)) (Eq. 4, 5), all in Hz.
	Mid, Lower, Upper float64
}

// bandTopFraction is the highest upper band edge a bank covers, as a fraction of the sample
// rate: the bands stop below 0.47 fs, where a converter's anti-alias filter still passes the
// signal flat, so the 20 kHz one-third-octave band (upper edge 22.39 kHz) exists at 48 kHz
// and not at 44.1 kHz.
const bandTopFraction = 0.47

// Bands returns the bands of the set for sample rate fs in Hz, lowest first: one-third
// octaves from 12.5 Hz and octaves from 16 Hz up to the highest band whose upper edge lies
// below 0.47 fs. It returns nil for an unknown set or a rate too low to hold the lowest band.
// The midband frequencies and edges are the exact base-10 values of IEC 61260-1:2014
// Eq. 1–5, the names those of its Annex E.
func Bands(set BandSet, fs float64) []Band {
	if set != Octave && set != Third {
		return nil
	}
	b := int(set)
	var out []Band
	for x := set.lowest(); ; x++ {
		lo, hi := reference.BandEdges(b, x)
		if !(hi < bandTopFraction*fs) {
			break
		}
		out = append(out, Band{
			X:       x,
			Nominal: reference.NominalMidband(b, x),
			Mid:     reference.MidbandFrequency(b, x),
			Lower:   lo,
			Upper:   hi,
		})
	}
	return out
}

// Design constants of the filter bank. They trade cost against margins to the class 1 mask;
// the tests check the margins for every band, so change them only with the tests running.
const (
	// bankChunk is the number of input samples processed at a time; it sizes the scratch
	// buffers and has no effect on the results.
	bankChunk = 1024

	// bankBatch is the number of input samples a decimated stage gathers before it runs (all of
	// them run before MeanSquare reads the sums). It has no effect on the results: it spares
	// the deep stages, which receive a sample or two per call of a small block, the cost of a
	// call per filter for each. A larger value costs memory (stage k holds up to about
	// bankChunk/2^k + 2·bankBatch samples) for little more saving.
	bankBatch = 128

	// bankStageTop is the highest upper band edge, as a fraction of its stage's rate, that a
	// band in a decimated stage may have: each decimated stage holds the bands whose upper
	// edges lie in (bankStageTop/2, bankStageTop] of its rate, one octave. It is twice the pass
	// band edge of the half-band decimators (bankHalfPass of their input rate).
	bankStageTop = 0.4

	// bankOrder and bankOrderTop are the Butterworth orders of the band-pass prototypes:
	// bankOrderTop for the bands of the full-rate stage whose upper edge lies above
	// bankTopEdge·fs, where the warping of the bilinear transform needs the steeper skirt, and
	// bankOrder for all others (the upper branch has its own, bankOrderUpper). The kernels are
	// unrolled for bankOrder sections and a stage's shared numerator is (1 - z⁻²)^bankOrder.
	bankOrder    = 4
	bankOrderTop = 5
	bankTopEdge  = 0.45

	// bankEdgeDB is the attenuation of every band at its exact band edges, in dB: adjacent bands
	// cross there, so a sine on the edge reads bankEdgeDB down in each, and their energies sum
	// to 10 lg(2·10^(-bankEdgeDB/10)) = -0.09 dB of the sine's. 3.01 dB would make that sum
	// exact, but then the effective bandwidth of a fourth-order Butterworth band is 0.11 dB wide
	// of the nominal (the bands of a broadband signal would add up to 0.11 dB too much); 3.1 dB
	// splits the two errors.
	bankEdgeDB = 3.1

	// bankHalfPass is the pass band edge of the half-band decimators, as a fraction of their
	// input rate (the stop band starts at 0.5 - bankHalfPass), and bankHalfCoefs the number of
	// their all-pass coefficients: 4 (order 9) give a pass band flat within 5e-7 dB and a stop
	// band at least 70 dB down, which keeps every band 8 dB or more inside the class 1 limits
	// (the tests measure the margins); 5 (order 11) would give 1e-8 dB and 86 dB for about 6
	// instructions per input sample more, 3 (order 7) only 53 dB, which fails class 1.
	bankHalfPass  = 0.2
	bankHalfCoefs = 4

	// bankUpperFloor is the lowest lower band edge, as a fraction of fs, of a band computed in
	// the upper branch at fs/2, and bankOrderUpper the order of its band-pass prototype. A sine
	// of frequency f > fs/4 reaches the upper branch at fs/2 - f, and so does one of frequency
	// fs/2 - f < fs/4, attenuated by the high-pass: with the band's lower edge at 0.29 fs or
	// above, what lands in the band comes from below 0.21 fs, where the high-pass is 70 dB down
	// (from 0.2 fs) or close to it. The band filters there are designed for the folded band
	// edges, and the bilinear transform's warping, which works against a band close to the
	// Nyquist frequency at the full rate, steepens the skirt that faces fs/4; order 4 then
	// meets the class 1 limits with the same margins as the other bands (the tests check them
	// with the folding included).
	bankUpperFloor = 0.29
	bankOrderUpper = 4
)

// FilterBank is a bank of octave or one-third-octave band-pass filters per IEC 61260-1:2014,
// designed to meet the class 1 acceptance limits on relative attenuation (Table 1), effective
// bandwidth (5.12.2) and the summation of adjacent bands (5.16) at every sample rate from
// 8 kHz to 192 kHz. The tests show these limits are met in electrical tests of the digital
// filters; that is not a type approval.
//
// # Design
//
// Each band is a Butterworth band-pass filter centred on the exact midband frequency: the
// analogue low-pass prototype of order N is transformed to a band-pass of order 2N and mapped
// to the digital domain by the bilinear transform with the exact band edges of Eq. 4 and 5
// pre-warped, giving N second-order sections with zeros at DC and at the Nyquist frequency.
// The bandwidth of the transform is set so that the response at both exact band edges is
// 3.1 dB below the midband: adjacent bands cross there, so a sine on an edge reads 3.1 dB down
// in each of its two bands and the two hold 98 % of its energy (-0.09 dB). A Butterworth
// response that crossed at 3.01 dB would have an effective bandwidth 0.11 dB wider than the
// nominal one for N = 4, so the bands of a broadband signal would add up to 0.11 dB too much;
// at 3.1 dB it is 0.09 dB. Table 1 allows 1.2 to 5.3 dB at the edges. The gain is set so that
// the response at the exact midband frequency is 0 dB. A Butterworth bank is not power
// complementary: a sine a little inside a band still reads 7 to 9 dB down in its neighbour,
// so the bands of a sine add up to between -0.33 and +0.49 dB of it for one-third octaves
// and between -0.84 and +0.70 dB for octaves (IEC 61260-1 allows -1.8/+0.8 dB for two
// adjacent bands).
//
// N is 4, and 5 for a band of the full-rate stage whose upper edge lies above 0.45 fs (the
// 16 kHz octave at 48 kHz): close to the Nyquist frequency the warping of the bilinear
// transform flattens the lower skirt and tilts the lower pass band, and the higher order
// restores the margins.
//
// The bank is multirate. Stage 0 runs at the input rate fs; stage k runs at fs/2^k and is fed
// from stage k-1 through a half-band decimator: an elliptic IIR low-pass of order 9 in
// polyphase form (two branches of first-order all-pass sections, four coefficients, run at the
// output rate), flat within 5·10⁻⁷ dB up to 0.2 of its input rate and at least 70 dB down from
// 0.3 of it. A band is computed in the lowest-rate stage k in which its upper edge is at most
// 0.4 fs/2^k, so every decimated stage holds one octave of bands with upper edges between 0.2
// and 0.4 of its rate, and stage 0 holds the rest (upper edges from 0.2 fs to 0.47 fs: the top
// four one-third octaves). What a decimator folds back lands either 70 dB down or above 0.4 of
// the lower stage's rate, where the band filters attenuate it; Response includes that
// folding, so the tests check it against the mask.
//
// The bands of stage 0 whose lower edge lies at 0.29 fs or above (the 16 and 20 kHz
// one-third octaves at 48 kHz, 16 kHz at 44.1 kHz) run at fs/2 instead, in the upper branch:
// the first decimator's two all-pass branches give, besides the low-pass ½·[A0(z²) + z⁻¹A1(z²)],
// its power-complementary high-pass ½·[A0(z²) - z⁻¹A1(z²)] for one subtraction more, and that
// high-pass, kept at every second sample, carries the top of the spectrum folded about fs/4: a
// sine of frequency f appears at fs/2 - f. The band filters there are designed for the folded
// band edges. The folding also brings in what lies at fs/2 - f below fs/4, which the high-pass
// holds 70 dB down below 0.2 fs; the band's lower edge at 0.29 fs keeps that out of the band.
//
// The numerators (1 - z⁻²) of all sections commute with their poles, so each stage applies
// (1 - z⁻²)⁴ once to its input, as a direct-form FIR, for all its bands; each band then runs
// its all-pole sections (and a fifth-order band one more numerator factor of its own).
//
// # Delay and settling
//
// A band of stage k lags the input by the group delays of the decimators above it (a few
// samples at each one's input rate) plus its own at the midband, about 0.9/(Upper-Lower)
// seconds for N = 4. Energy that arrives at the end of one MeanSquare span is counted partly in
// the next. The filters start from rest; Settle gives the time each band needs to settle (a
// second or two for the lowest bands), and SettledMeanSquare leaves out what comes before it.
//
// # Cost
//
// A section costs 2 multiplications and 2 additions per sample at its stage's rate, the
// shared numerator 2 multiplications and 4 additions, the mean square 2 more operations per
// band, and a half-band decimator 5 multiplications and 9 additions per kept sample. For
// one-third octaves at 48 kHz stage 0 holds 2 bands (8 sections), the upper branch 2 bands at
// half rate, and each lower stage 3 bands (12 sections) at half the rate of the one above, so
// the bank costs about 24 section updates per input sample (29, with 17 at the full rate,
// before the upper branch); the octave bank (stage 0 with 2 bands, 9 sections; 4 sections in
// each lower stage) about 13. Measured with callgrind on amd64 (Go 1.26, GOAMD64=v1;
// .ci/callgrind-meter), the meter with one-third-octave bands costs 446 instructions per input
// sample, of which the bank takes about 267 (the section kernels 187, the shared numerators 34,
// the decimators 42, calls and copies the rest); before issue 18's work it cost 677, the bank
// about 405, and 565 with this bank before the rest of the chain was made cheaper. The
// decimated stages gather bankBatch samples before they run, so that the deep stages, which
// receive a sample or two per block of the meter, do not pay a call per filter for each.
// The section kernels take two samples per turn so that no state is copied; running the
// sections two at a time over each block with all state in registers took more time (40
// against 27 ns per sample): the sections of one band in one loop overlap their recursions.
//
// A bank of power-complementary low/high splits (pairs of all-pass branches, as the upper
// branch uses) would sum a sine's energy exactly, but it does not cost less for class 1
// one-third octaves: a split at a band edge must fall from 1.4 dB down at 0.97 of the edge
// (Table 1, x = 3/8) to 16.6 dB down at 1.15 of it (x = 1) on its own, and the outer splits
// of each octave must reach 70 dB (x = 4) alone. A Butterworth split would need order 16 for
// the first (computed from |H|² = 1/(1 + ω^2N)); an elliptic one about order 7 (an estimate
// from the elliptic degree equation, not a design), one multiplication per order, so three
// splits per octave cost about as many multiplications as the twelve sections they replace.
//
// # Block size
//
// Process takes blocks of any length. All filter state, including the position of each
// decimator in its two-sample cycle and the samples a decimated stage has gathered, is carried
// across calls (MeanSquare and SettledMeanSquare first run what has been gathered), and every
// sum, the settling part of SettledMeanSquare's included, is accumulated sample by sample in
// the same order, so the results are bit-for-bit the same whatever the block cut. Neither Process nor MeanSquare (given a large enough dst) allocates.
//
// A NaN or infinite sample makes the state of every filter NaN until Reset; callers reject
// such samples before they reach the bank. A FilterBank is not safe for concurrent use.
type FilterBank struct {
	set    BandSet
	fs     float64
	bands  []Band
	stages []bankStage
	chain  int         // the stages fed one from the next: stages[:chain]; stages[chain], if any, is the upper branch
	where  []bankWhere // per band: its stage and filter index
}

type bankWhere struct{ stage, filter int }

// bankStage is one rate of the multirate bank.
type bankStage struct {
	rate    float64
	filters []bankFilter
	count   int            // samples seen since the last MeanSquare
	in      []float64      // input of stages k ≥ 1: the samples gathered (pending), then room for more
	pending int            // samples in in not yet run (stages k ≥ 1 of the chain)
	u       []float64      // scratch: the input after the shared numerator
	hist    []float64      // the shared numerator's input: its last bankNumeratorLen samples, then the chunk
	dec     *bankDecimator // feeds the next stage; nil for the last
}

// bankMaxSections is the largest number of sections of a band filter.
const bankMaxSections = bankOrderTop

// bankFilter is one band-pass filter: sections with numerator 1 - z⁻² (coefficients B0 = 1,
// B2 = -1) and an overall gain applied to the mean square. The numerators commute with the
// poles, so they run first: the stage applies the factors (1 - z⁻²) that all its bands have
// once for all of them, the filter any further ones (extra), and then its all-pole sections in
// direct form II.
type bankFilter struct {
	band   int
	sec    []Section                   // the sections as designed (Response, settling)
	nsec   int                         // len(sec)
	extra  int                         // numerator factors of its own
	a      [bankMaxSections][2]float64 // -A1, -A2 per section
	a2     [bankMaxSections][2]float64 // a copy of a for the kernels' second sample (see run4)
	w      [bankMaxSections][2]float64 // w[n-1], w[n-2] per section
	num    [bankMaxSections][2]float64 // last two inputs, newest first, per numerator factor of its own
	gain   float64
	sum    float64 // sum of squared (unscaled) outputs since the last MeanSquare
	early  float64 // the part of sum from before the filter had settled
	nEarly int     // outputs in early
	settle int     // outputs, at the stage's rate, from rest until the filter has settled
	skip   int     // outputs still to come before the filter has settled
}

// newBankFilter returns a filter for band of the sections sec at rest, for a stage whose shared
// numerator has m factors.
func newBankFilter(band int, sec []Section, gain float64, m, settle int) bankFilter {
	f := bankFilter{band: band, sec: sec, nsec: len(sec), extra: len(sec) - m, gain: gain, settle: settle, skip: settle}
	for i, c := range sec {
		f.a[i] = [2]float64{-c.A1, -c.A2}
		f.a2[i] = f.a[i]
	}
	return f
}

// bankDecimator is a half-band IIR low-pass that keeps every second sample, in polyphase form:
// H(z) = ½·[A0(z²) + z⁻¹·A1(z²)], where A0 and A1 are chains of first-order all-pass sections
// (a + z⁻¹)/(1 + a·z⁻¹) run at the output rate; A0 takes the kept samples, A1 the skipped ones.
type bankDecimator struct {
	a0, a1 []float64 // coefficients of the two branches
	s0, s1 []float64 // branch states: the last input, then the last output of each section
	odd    float64   // A1's output for the last skipped sample
	half   float64   // ½, held in a field so that the unrolled loops keep it in a register
	phase  int       // 0: the next input sample is kept; 1: it is skipped
}

// NewFilterBank returns a filter bank for the band set at sample rate fs (8 kHz to 192 kHz),
// at rest. Its bands are those of Bands(set, fs).
func NewFilterBank(set BandSet, fs float64) (*FilterBank, error) {
	if set != Octave && set != Third {
		return nil, fmt.Errorf("dsp: filter bank: band set %d: want Octave (1) or Third (3)", int(set))
	}
	if !(fs >= 8000 && fs <= 192000) {
		return nil, fmt.Errorf("dsp: filter bank: sample rate %g Hz: want 8000 to 192000 Hz", fs)
	}
	bands := Bands(set, fs)
	if len(bands) == 0 {
		return nil, errors.New("dsp: filter bank: no band fits the sample rate")
	}
	// The stage of each band: the lowest rate at which its upper edge is at most
	// bankStageTop of the rate (the full rate for the bands above bankStageTop·fs/2).
	stageOf := make([]int, len(bands))
	nstage := 1
	for i, bd := range bands {
		k := 0
		for bd.Upper <= bankStageTop*fs/math.Ldexp(1, k+1) {
			k++
		}
		stageOf[i] = k
		nstage = max(nstage, k+1)
	}
	// The bands of stage 0 whose lower edge lies at least bankUpperFloor·fs up go to the upper
	// branch, a stage at fs/2 fed by the first decimator's high-pass output.
	upper := false
	if nstage > 1 {
		for i, bd := range bands {
			if stageOf[i] == 0 && bd.Lower >= bankUpperFloor*fs {
				stageOf[i] = nstage
				upper = true
			}
		}
	}
	fb := &FilterBank{
		set:    set,
		fs:     fs,
		bands:  bands,
		stages: make([]bankStage, nstage),
		chain:  nstage,
		where:  make([]bankWhere, len(bands)),
	}
	if upper {
		fb.stages = append(fb.stages, bankStage{})
	}
	half := bankHalfBand(bankHalfCoefs, bankHalfPass)
	decSettle := bankDecimatorSettle(half)
	n := bankChunk
	for k := range fb.stages[:nstage] {
		st := &fb.stages[k]
		st.rate = fs / math.Ldexp(1, k)
		if k > 0 {
			// What the stage above sends at a time (at most half of what it runs at a time,
			// rounded up for its phase) added to fewer than bankBatch samples gathered before.
			n = (n+1)/2 + bankBatch
			st.in = make([]float64, n)
		}
		st.u = make([]float64, n)
		st.hist = make([]float64, bankNumeratorLen+n)
		if k+1 < nstage {
			st.dec = newBankDecimator(half)
		}
	}
	if upper {
		st := &fb.stages[nstage]
		st.rate = fs / 2
		n = (bankChunk + 1) / 2
		st.in = make([]float64, n)
		st.u = make([]float64, n)
		st.hist = make([]float64, bankNumeratorLen+n)
	}
	type design struct {
		sec    []Section
		gain   float64
		settle int
	}
	designs := make([]design, len(bands))
	for i, bd := range bands {
		k := stageOf[i]
		st := &fb.stages[k]
		order := bankOrder
		if k == 0 && bd.Upper > bankTopEdge*fs {
			order = bankOrderTop
		}
		var sec []Section
		var gain float64
		if k == nstage {
			// In the upper branch a sine of frequency f appears at fs/2 - f.
			h := fs / 2
			sec, gain = bankBandPass(bankOrderUpper, h-bd.Upper, h-bd.Lower, h-bd.Mid, st.rate)
		} else {
			sec, gain = bankBandPass(order, bd.Lower, bd.Upper, bd.Mid, st.rate)
		}
		settle := bankSettle(sec, st.rate/(bd.Upper-bd.Lower))
		if k > 0 {
			// The decimators above start from rest too: each rings down within decSettle of
			// its output samples, all of them within 2·decSettle at this stage's rate.
			settle += 2 * decSettle
		}
		designs[i] = design{sec, gain, settle}
	}
	for i := range bands {
		st := &fb.stages[stageOf[i]]
		d := designs[i]
		fb.where[i] = bankWhere{stage: stageOf[i], filter: len(st.filters)}
		st.filters = append(st.filters, newBankFilter(i, d.sec, d.gain, bankOrder, d.settle))
	}
	return fb, nil
}

// bankBandPass designs a digital Butterworth band-pass filter of prototype order n for the
// band from f1 to f2 (Hz) at sample rate fs, by the low-pass to band-pass transform
// s → (s² + ω0²)/(s·B) with pre-warped edges ωi = 2fs·tan(π fi/fs), ω0² = ω1ω2,
// B = (ω2 - ω1)·sin(π/2n)/(π/2n) (the noise bandwidth of the prototype then spans the band),
// and the bilinear transform z = (2fs + s)/(2fs - s). It returns n sections with numerator
// 1 - z⁻² and the gain that makes the response 1 at fm.
func bankBandPass(n int, f1, f2, fm, fs float64) ([]Section, float64) {
	k := 2 * fs
	w1 := k * math.Tan(math.Pi*f1/fs)
	w2 := k * math.Tan(math.Pi*f2/fs)
	w0sq := w1 * w2
	// The prototype's response at the band edges, 1/(1 + (B/bw)^(2n)), is bankEdgeDB down.
	bw := (w2 - w1) * math.Pow(math.Pow(10, bankEdgeDB/10)-1, -1/float64(2*n))
	var upper, reals []complex128
	for i := 0; i < n; i++ {
		p := cmplx.Exp(complex(0, math.Pi*float64(2*i+n+1)/float64(2*n)))
		pb := p * complex(bw, 0)
		d := cmplx.Sqrt(pb*pb - complex(4*w0sq, 0))
		for _, s := range [2]complex128{(pb + d) / 2, (pb - d) / 2} {
			z := (complex(k, 0) + s) / (complex(k, 0) - s)
			switch {
			case math.Abs(imag(z)) <= 1e-12:
				reals = append(reals, complex(real(z), 0))
			case imag(z) > 0:
				upper = append(upper, z)
			}
		}
	}
	sec := make([]Section, 0, n)
	for _, z := range upper {
		sec = append(sec, Section{B0: 1, B2: -1, A1: -2 * real(z), A2: real(z)*real(z) + imag(z)*imag(z)})
	}
	for i := 0; i+1 < len(reals); i += 2 {
		a, b := real(reals[i]), real(reals[i+1])
		sec = append(sec, Section{B0: 1, B2: -1, A1: -(a + b), A2: a * b})
	}
	gain := 1 / cmplx.Abs(CascadeResponse(sec, fm, fs))
	return sec, gain
}

// bankSettledShare is the share of a band filter's impulse-response energy delivered by the time
// it counts as settled: from rest, a steady noise then reads within 10 lg(0.999) = -0.004 dB.
const bankSettledShare = 0.999

// bankSettle returns the number of samples after which the impulse response of the sections has
// delivered bankSettledShare of its energy. cycles is the sample rate divided by the bandwidth;
// the response is followed for 100 such spans, by which its energy has long converged.
func bankSettle(sec []Section, cycles float64) int {
	n := int(math.Ceil(100 * cycles))
	e := make([]float64, n)
	state := make([][2]float64, len(sec))
	total := 0.0
	for t := range n {
		v := 0.0
		if t == 0 {
			v = 1
		}
		for i := range sec {
			st := &state[i]
			w := v - sec[i].A2*st[1] - sec[i].A1*st[0]
			v = w - st[1]
			st[1], st[0] = st[0], w
		}
		total += v * v
		e[t] = total
	}
	for t, c := range e {
		if c >= bankSettledShare*total {
			return t + 1
		}
	}
	return n
}

// bankHalfBand returns the all-pass coefficients of an elliptic half-band low-pass with n
// coefficients (order 2n+1) and pass band edge fp (a fraction of the sample rate; the stop band
// starts at 0.5 - fp), in the polyphase form of bankDecimator: coefficients 0, 2, 4 ... belong to
// branch A0, 1, 3 ... to A1. It is the classical design of such filters from the Jacobi elliptic
// functions (R. A. Valenzuela and A. G. Constantinides, "Digital signal processing schemes for
// efficient interpolation and decimation", IEE Proceedings G, 1983): with the selectivity
// k = tan²(π(1 - 2t)/4) for the transition width t = 0.5 - 2fp and the nome q of the modulus
// (series in e = ½(1 - k'^½)/(1 + k'^½), k' = √(1 - k²)), the coefficient i (c = i + 1) is
// (1 - x)/(1 + x) with x = √((1 - w²k)(1 - w²/k))/(1 + w²) and
// w = q^¼·Σ (-1)^m q^(m(m+1)) sin((2m+1)cπ/(2n+1)) / (½ + Σ_{m≥1} (-1)^m q^(m²) cos(2mcπ/(2n+1))).
// The tests check the resulting response, not these formulas.
func bankHalfBand(n int, fp float64) []float64 {
	t := 0.5 - 2*fp
	k := math.Pow(math.Tan((1-2*t)*math.Pi/4), 2)
	kk := math.Pow(1-k*k, 0.25)
	e := 0.5 * (1 - kk) / (1 + kk)
	e4 := e * e * e * e
	q := e * (1 + e4*(2+e4*(15+150*e4)))
	order := float64(2*n + 1)
	coef := make([]float64, n)
	for i := range coef {
		c := float64(i + 1)
		num, sign := 0.0, 1.0
		for m := 0; ; m++ {
			term := math.Pow(q, float64(m*(m+1))) * math.Sin(float64(2*m+1)*c*math.Pi/order) * sign
			num += term
			sign = -sign
			if math.Abs(term) < 1e-100 {
				break
			}
		}
		den, sign := 0.5, -1.0
		for m := 1; ; m++ {
			term := math.Pow(q, float64(m*m)) * math.Cos(2*float64(m)*c*math.Pi/order) * sign
			den += term
			sign = -sign
			if math.Abs(term) < 1e-100 {
				break
			}
		}
		w := num * math.Pow(q, 0.25) / den
		w2 := w * w
		x := math.Sqrt((1-w2*k)*(1-w2/k)) / (1 + w2)
		coef[i] = (1 - x) / (1 + x)
	}
	return coef
}

func newBankDecimator(coef []float64) *bankDecimator {
	d := &bankDecimator{half: 0.5}
	for i, a := range coef {
		if i%2 == 0 {
			d.a0 = append(d.a0, a)
		} else {
			d.a1 = append(d.a1, a)
		}
	}
	d.s0 = make([]float64, len(d.a0)+1)
	d.s1 = make([]float64, len(d.a1)+1)
	return d
}

// bankDecimatorSettle returns the number of output samples after which the decimator's impulse
// response has delivered bankSettledShare of its energy.
func bankDecimatorSettle(coef []float64) int {
	d := newBankDecimator(coef)
	x := make([]float64, 2048)
	x[0] = 1
	y := make([]float64, len(x)/2)
	d.decimate(x, y)
	total := 0.0
	for _, v := range y {
		total += v * v
	}
	sum := 0.0
	for i, v := range y {
		sum += v * v
		if sum >= bankSettledShare*total {
			return i + 1
		}
	}
	return len(y)
}

// allpassChain runs x through first-order all-pass sections (a + z⁻¹)/(1 + a·z⁻¹) in turn,
// y = a·(x - y[n-1]) + x[n-1]; s holds each section's last input, then the last section's
// output, so that a section's last input is the previous section's last output.
func allpassChain(a, s []float64, x float64) float64 {
	for i, c := range a {
		y := c*(x-s[i+1]) + s[i]
		s[i] = x
		x = y
	}
	s[len(a)] = x
	return x
}

// response returns the frequency response of the decimator's filter at f for input rate fs.
func (d *bankDecimator) response(f, fs float64) complex128 {
	z1 := cmplx.Exp(complex(0, -2*math.Pi*f/fs)) // z⁻¹
	z2 := z1 * z1
	chain := func(a []float64) complex128 {
		h := complex(1, 0)
		for _, c := range a {
			h *= (complex(c, 0) + z2) / (1 + complex(c, 0)*z2)
		}
		return h
	}
	return 0.5 * (chain(d.a0) + z1*chain(d.a1))
}

// responseHigh returns the frequency response of the decimator's complementary high-pass,
// ½·[A0(z²) - z⁻¹·A1(z²)], at f for input rate fs.
func (d *bankDecimator) responseHigh(f, fs float64) complex128 {
	z1 := cmplx.Exp(complex(0, -2*math.Pi*f/fs)) // z⁻¹
	z2 := z1 * z1
	chain := func(a []float64) complex128 {
		h := complex(1, 0)
		for _, c := range a {
			h *= (complex(c, 0) + z2) / (1 + complex(c, 0)*z2)
		}
		return h
	}
	return 0.5 * (chain(d.a0) - z1*chain(d.a1))
}

// decimateBoth is decimate that also writes the complementary high-pass output,
// ½·[A0(z²) - z⁻¹·A1(z²)], of each kept sample to high.
func (d *bankDecimator) decimateBoth(x, out, high []float64) int {
	if len(d.a0) == 2 && len(d.a1) == 2 {
		return d.decimate4Both(x, out, high)
	}
	return d.decimateBothAny(x, out, high)
}

func (d *bankDecimator) decimateBothAny(x, out, high []float64) int {
	k := 0
	for _, v := range x {
		if d.phase == 1 {
			d.odd = allpassChain(d.a1, d.s1, v)
			d.phase = 0
			continue
		}
		e := allpassChain(d.a0, d.s0, v)
		out[k] = 0.5 * (e + d.odd)
		high[k] = 0.5 * (e - d.odd)
		k++
		d.phase = 1
	}
	return k
}

// decimate4Both is decimate4 with the high-pass output; it computes the same bits as
// decimateBothAny.
func (d *bankDecimator) decimate4Both(x, out, high []float64) int {
	if d.phase == 1 && len(x) > 0 {
		d.decimateBothAny(x[:1], out, high) // a skipped sample: nothing kept
		x = x[1:]
	}
	c0, c1 := d.a0[0], d.a0[1]
	e0, e1 := d.a1[0], d.a1[1]
	s := (*[3]float64)(d.s0)
	t := (*[3]float64)(d.s1)
	s0, s1, s2 := s[0], s[1], s[2]
	t0, t1, t2 := t[0], t[1], t[2]
	odd := d.odd
	half := d.half
	n := len(x) &^ 1
	y := x[:n]
	o, h := out[:n/2], high[:n/2]
	for i := 1; i < len(y); i += 2 {
		v := y[i-1]
		w := c0*(v-s1) + s0
		s0 = v
		s1, s2 = w, c1*(w-s2)+s1
		o[i>>1] = half * (s2 + odd)
		h[i>>1] = half * (s2 - odd)
		v = y[i]
		w = e0*(v-t1) + t0
		t0 = v
		t1, t2 = w, e1*(w-t2)+t1
		odd = t2
	}
	*s = [3]float64{s0, s1, s2}
	*t = [3]float64{t0, t1, t2}
	d.odd = odd
	return n/2 + d.decimateBothAny(x[n:], out[n/2:], high[n/2:])
}

// decimate filters x and writes the kept samples to out, returning their number.
func (d *bankDecimator) decimate(x, out []float64) int {
	if len(d.a0) == 2 && len(d.a1) == 2 {
		return d.decimate4(x, out)
	}
	return d.decimateAny(x, out)
}

// decimateAny is decimate for any number of coefficients.
func (d *bankDecimator) decimateAny(x, out []float64) int {
	k := 0
	for _, v := range x {
		if d.phase == 1 {
			d.odd = allpassChain(d.a1, d.s1, v)
			d.phase = 0
			continue
		}
		out[k] = 0.5 * (allpassChain(d.a0, d.s0, v) + d.odd)
		k++
		d.phase = 1
	}
	return k
}

// decimate4 is decimate for four coefficients (two in each branch), with the states in
// registers and a kept and a skipped sample per turn; an odd sample at either end goes through
// decimateAny. It computes the same bits as decimateAny.
func (d *bankDecimator) decimate4(x, out []float64) int {
	if d.phase == 1 && len(x) > 0 {
		d.decimateAny(x[:1], out) // a skipped sample: nothing kept
		x = x[1:]
	}
	c0, c1 := d.a0[0], d.a0[1]
	e0, e1 := d.a1[0], d.a1[1]
	s := (*[3]float64)(d.s0)
	t := (*[3]float64)(d.s1)
	s0, s1, s2 := s[0], s[1], s[2]
	t0, t1, t2 := t[0], t[1], t[2]
	odd := d.odd
	half := d.half
	n := len(x) &^ 1
	y := x[:n]
	o := out[:n/2]
	for i := 1; i < len(y); i += 2 { // i is the skipped sample: one bounds check for both
		// The kept sample through A0.
		v := y[i-1]
		w := c0*(v-s1) + s0
		s0 = v
		s1, s2 = w, c1*(w-s2)+s1
		o[i>>1] = half * (s2 + odd)
		// The skipped sample through A1.
		v = y[i]
		w = e0*(v-t1) + t0
		t0 = v
		t1, t2 = w, e1*(w-t2)+t1
		odd = t2
	}
	*s = [3]float64{s0, s1, s2}
	*t = [3]float64{t0, t1, t2}
	d.odd = odd
	return n/2 + d.decimateAny(x[n:], out[n/2:])
}

// Bands returns the bands of the bank, lowest first, as a fresh slice.
func (b *FilterBank) Bands() []Band { return append([]Band(nil), b.bands...) }

// Set returns the band set of the bank.
func (b *FilterBank) Set() BandSet { return b.set }

// SampleRate returns the input sample rate in Hz.
func (b *FilterBank) SampleRate() float64 { return b.fs }

// BandRate returns the sample rate in Hz at which band i (an index into Bands) is computed:
// fs/2^k for a band in stage k, fs/2 for a band in the upper branch.
func (b *FilterBank) BandRate(i int) float64 { return b.stages[b.where[i].stage].rate }

// Process filters the samples x (Z-weighted, with the DC offset already removed: every band
// filter has zeros at DC, but a step in the offset rings in the low bands for seconds) through
// every band and adds the squared band outputs to the running sums. x may have any length.
func (b *FilterBank) Process(x []float64) {
	for len(x) > 0 {
		n := min(len(x), bankChunk)
		b.chunk(x[:n], false)
		x = x[n:]
	}
}

// chunk runs x through stage 0 and the upper branch, and the decimated stages of the chain
// that have gathered bankBatch samples or more (all of them, with whatever they hold, if all
// is set). Each filter sees the same samples in the same order whenever its stage runs, so
// the results do not depend on when that is.
func (b *FilterBank) chunk(x []float64, all bool) {
	for k := range b.stages[:b.chain] {
		st := &b.stages[k]
		if k > 0 {
			if st.pending < bankBatch && !all {
				return
			}
			x = st.in[:st.pending]
			st.pending = 0
		}
		st.run(x)
		if st.dec == nil {
			return
		}
		next := &b.stages[k+1]
		if k == 0 && b.chain < len(b.stages) {
			up := &b.stages[b.chain]
			m := st.dec.decimateBoth(x, next.in[next.pending:], up.in)
			up.run(up.in[:m])
			next.pending += m
		} else {
			next.pending += st.dec.decimate(x, next.in[next.pending:])
		}
	}
}

// flush runs the samples the decimated stages have gathered.
func (b *FilterBank) flush() { b.chunk(nil, true) }

// run filters x through the stage's shared numerator and its band filters.
func (st *bankStage) run(x []float64) {
	if len(st.filters) > 0 {
		u := st.u[:len(x)]
		bankNumerator4(st.hist, x, u, 4, 6)
		for i := range st.filters {
			st.filters[i].run(u)
		}
	}
	st.count += len(x)
}

// run filters x, the stage's input after the stage's shared numerator (1 - z⁻²)⁴, through f's
// remaining numerator factors and its all-pole sections,
//
//	w[n] = ((-a2)·w[n-2] + v[n]) + (-a1)·w[n-1],
//
// section after section for each sample, and adds the last section's w² to f.sum. The sections
// of one band run in the same loop so that the processor can overlap them across samples (their
// recursions are independent chains), and the a1 term comes last so that the recursion through
// w[n-1] costs one multiplication and one addition of latency per sample.
func (f *bankFilter) run(x []float64) {
	if f.skip > 0 {
		// Still settling: the outputs count in sum, and in early too.
		k := min(f.skip, len(x))
		f.runSettling(x[:k])
		f.nEarly += k
		f.skip -= k
		x = x[k:]
	}
	f.runSections(x)
}

func (f *bankFilter) runSections(x []float64) {
	switch {
	case f.nsec == 4 && f.extra == 0:
		f.run4(x)
		return
	case f.nsec == 5 && f.extra == 1:
		f.run5(x)
		return
	}
	f.runAny(x)
}

// runAny is run for any number of sections and numerator factors.
func (f *bankFilter) runAny(x []float64) {
	sum := f.sum
	for _, v := range x {
		for i := range f.extra {
			e := &f.num[i]
			v, e[0], e[1] = v-e[1], v, e[0]
		}
		for i := range f.nsec {
			c, st := &f.a[i], &f.w[i]
			w := c[1]*st[1] + v + c[0]*st[0]
			st[1], st[0] = st[0], w
			v = w
		}
		sum += v * v
	}
	f.sum = sum
}

// runSettling is runAny that also adds each output's square to early, sample by sample, so
// that early, like sum, does not depend on how the samples were cut into blocks. It runs only
// while the filter settles.
func (f *bankFilter) runSettling(x []float64) {
	sum, early := f.sum, f.early
	for _, v := range x {
		for i := range f.extra {
			e := &f.num[i]
			v, e[0], e[1] = v-e[1], v, e[0]
		}
		for i := range f.nsec {
			c, st := &f.a[i], &f.w[i]
			w := c[1]*st[1] + v + c[0]*st[0]
			st[1], st[0] = st[0], w
			v = w
		}
		sum += v * v
		early += v * v
	}
	f.sum, f.early = sum, early
}

// run4 is run for four sections and no numerator factor of its own. It takes two samples per
// turn, so that the two state registers of each section swap roles instead of being copied:
// the first sample's w overwrites w[n-2], the second's w[n-1]. Each section adds the products
// of negated coefficients to its input v, which the section before keeps as its state, so that
// v is only read, never copied; the second sample reads its coefficients from a copy
// (a2), so that the compiler loads them afresh instead of keeping all eight in registers, which
// would not leave room for the state. It computes the same bits as runAny.
func (f *bankFilter) run4(x []float64) {
	c1, c2, c3, c4 := &f.a[0], &f.a[1], &f.a[2], &f.a[3]
	d1, d2, d3, d4 := &f.a2[0], &f.a2[1], &f.a2[2], &f.a2[3]
	p1, q1 := f.w[0][0], f.w[0][1]
	p2, q2 := f.w[1][0], f.w[1][1]
	p3, q3 := f.w[2][0], f.w[2][1]
	p4, q4 := f.w[3][0], f.w[3][1]
	sum := f.sum
	n := len(x) &^ 1
	y := x[:n]
	for i := 1; i < len(y); i += 2 { // i is the second sample: one bounds check for both
		q1 = c1[1]*q1 + y[i-1] + c1[0]*p1
		q2 = c2[1]*q2 + q1 + c2[0]*p2
		q3 = c3[1]*q3 + q2 + c3[0]*p3
		q4 = c4[1]*q4 + q3 + c4[0]*p4
		sum += q4 * q4
		p1 = d1[1]*p1 + y[i] + d1[0]*q1
		p2 = d2[1]*p2 + p1 + d2[0]*q2
		p3 = d3[1]*p3 + p2 + d3[0]*q3
		p4 = d4[1]*p4 + p3 + d4[0]*q4
		sum += p4 * p4
	}
	f.w[0] = [2]float64{p1, q1}
	f.w[1] = [2]float64{p2, q2}
	f.w[2] = [2]float64{p3, q3}
	f.w[3] = [2]float64{p4, q4}
	f.sum = sum
	if n < len(x) {
		f.runAny(x[n:])
	}
}

// run5 is run4 for five sections and one numerator factor (1 - z⁻²) of its own.
func (f *bankFilter) run5(x []float64) {
	c1, c2, c3, c4, c5 := &f.a[0], &f.a[1], &f.a[2], &f.a[3], &f.a[4]
	d1, d2, d3, d4, d5 := &f.a2[0], &f.a2[1], &f.a2[2], &f.a2[3], &f.a2[4]
	e0, e1 := f.num[0][0], f.num[0][1]
	p1, q1 := f.w[0][0], f.w[0][1]
	p2, q2 := f.w[1][0], f.w[1][1]
	p3, q3 := f.w[2][0], f.w[2][1]
	p4, q4 := f.w[3][0], f.w[3][1]
	p5, q5 := f.w[4][0], f.w[4][1]
	sum := f.sum
	n := len(x) &^ 1
	for i := 0; i < n; i += 2 {
		v := x[i] - e1
		e1 = x[i]
		q1 = c1[1]*q1 + v + c1[0]*p1
		q2 = c2[1]*q2 + q1 + c2[0]*p2
		q3 = c3[1]*q3 + q2 + c3[0]*p3
		q4 = c4[1]*q4 + q3 + c4[0]*p4
		q5 = c5[1]*q5 + q4 + c5[0]*p5
		sum += q5 * q5
		v = x[i+1] - e0
		e0 = x[i+1]
		p1 = d1[1]*p1 + v + d1[0]*q1
		p2 = d2[1]*p2 + p1 + d2[0]*q2
		p3 = d3[1]*p3 + p2 + d3[0]*q3
		p4 = d4[1]*p4 + p3 + d4[0]*q4
		p5 = d5[1]*p5 + p4 + d5[0]*q5
		sum += p5 * p5
	}
	f.num[0] = [2]float64{e0, e1}
	f.w[0] = [2]float64{p1, q1}
	f.w[1] = [2]float64{p2, q2}
	f.w[2] = [2]float64{p3, q3}
	f.w[3] = [2]float64{p4, q4}
	f.w[4] = [2]float64{p5, q5}
	f.sum = sum
	if n < len(x) {
		f.runAny(x[n:])
	}
}

// bankNumeratorLen is the number of past input samples the shared numerator reads.
const bankNumeratorLen = 8

// bankNumerator4 writes x filtered by (1 - z⁻²)⁴ = 1 - 4z⁻² + 6z⁻⁴ - 4z⁻⁶ + z⁻⁸, the numerator
// that the band filters of a stage share, to u. buf holds the last bankNumeratorLen input
// samples, then room for x: the filter reads the samples from there, as a direct-form FIR, so
// that it keeps no state in registers across samples.
//
// The binomial coefficients come in as arguments (four and six, 4 and 6), so that they stay in
// registers instead of being loaded as constants from memory for every sample.
//
//go:noinline
func bankNumerator4(buf, x, u []float64, four, six float64) {
	const h = bankNumeratorLen
	w := buf[:h+len(x)]
	copy(w[h:], x)
	u = u[:len(x)]
	n := len(u)
	w0, w2, w4, w6, w8 := w[:n], w[2:2+n], w[4:4+n], w[6:6+n], w[8:8+n]
	for i := range u {
		u[i] = (w8[i] + w0[i]) - four*(w6[i]+w2[i]) + six*w4[i]
	}
	copy(buf[:h], w[len(x):])
}

// MeanSquare returns, for each band in the order of Bands, the mean square of the band's
// output over the samples processed since the previous call (or since construction or
// Reset), in the units of the input squared, and restarts the sums. A band whose stage has
// seen no sample in that span (a decimated stage sees every 2^k-th input sample) reports NaN.
// MeanSquare counts the filters' start-up from rest; SettledMeanSquare leaves it out.
// The result is written to dst if it has room for every band, else to a new slice.
//
// For a steady sine of amplitude a inside a band the result tends to a²/2; for a signal
// spread over many bands, the sum of the bands' mean squares tends to the mean square of the
// signal between the lowest and the highest band edge (within the effective-bandwidth
// deviation, at most 0.09 dB for these filters).
func (b *FilterBank) MeanSquare(dst []float64) []float64 {
	b.flush()
	if cap(dst) < len(b.bands) {
		dst = make([]float64, len(b.bands))
	}
	dst = dst[:len(b.bands)]
	for k := range b.stages {
		st := &b.stages[k]
		for i := range st.filters {
			f := &st.filters[i]
			if st.count == 0 {
				dst[f.band] = math.NaN()
			} else {
				dst[f.band] = f.gain * f.gain * f.sum / float64(st.count)
			}
			f.sum, f.early, f.nEarly = 0, 0, 0
		}
		st.count = 0
	}
	return dst
}

// SettledMeanSquare is MeanSquare without the outputs from before each band's filter had
// settled (see Settle): ms[i] is the mean square of band i over its settled outputs since the
// previous call, and share[i] the fraction of the span's outputs that were settled (1 once the
// band has settled, 0 with ms[i] NaN while it is still settling). It restarts the sums as
// MeanSquare does. ms and share are written to if they have room for every band, else to new
// slices.
func (b *FilterBank) SettledMeanSquare(ms, share []float64) ([]float64, []float64) {
	b.flush()
	if cap(ms) < len(b.bands) {
		ms = make([]float64, len(b.bands))
	}
	if cap(share) < len(b.bands) {
		share = make([]float64, len(b.bands))
	}
	ms, share = ms[:len(b.bands)], share[:len(b.bands)]
	for k := range b.stages {
		st := &b.stages[k]
		for i := range st.filters {
			f := &st.filters[i]
			n := st.count - f.nEarly
			if n <= 0 {
				ms[f.band], share[f.band] = math.NaN(), 0
			} else {
				ms[f.band] = f.gain * f.gain * (f.sum - f.early) / float64(n)
				share[f.band] = float64(n) / float64(st.count)
			}
			f.sum, f.early, f.nEarly = 0, 0, 0
		}
		st.count = 0
	}
	return ms, share
}

// Reset returns every filter and decimator to rest and clears the sums, as after
// construction.
func (b *FilterBank) Reset() {
	for k := range b.stages {
		st := &b.stages[k]
		for i := range st.filters {
			f := &st.filters[i]
			f.w, f.num = [bankMaxSections][2]float64{}, [bankMaxSections][2]float64{}
			f.sum, f.early, f.nEarly, f.skip = 0, 0, 0, f.settle
		}
		st.count, st.pending = 0, 0
		clear(st.hist)
		if st.dec != nil {
			clear(st.dec.s0)
			clear(st.dec.s1)
			st.dec.odd, st.dec.phase = 0, 0
		}
	}
}

// Settle returns the time in seconds from rest (construction or Reset) after which band i (an
// index into Bands) counts as settled: its band-pass filter's impulse response has delivered
// 99.9 % of its energy (a steady noise then reads within 0.005 dB), plus the ringing of the
// decimators above its stage. SettledMeanSquare leaves out the outputs before it. At 48 kHz it is
// about 2.2 s for the 12.5 Hz one-third octave, 0.25 s for 125 Hz and 20 ms for 1250 Hz; it scales
// with the inverse of the bandwidth.
func (b *FilterBank) Settle(i int) float64 {
	w := b.where[i]
	st := &b.stages[w.stage]
	return float64(st.filters[w.filter].settle) / st.rate
}

// Response returns the steady-state response of band i (an index into Bands) to a sine of
// frequency f Hz at the input, as the complex gain of its whole chain: the half-band filters
// of the stages above it and its band-pass filter, each evaluated at the frequency the sine
// has at that stage's rate after the decimations before it. It therefore includes what
// decimation folds into the band; its magnitude is exact for a steady sine (except at the
// folding frequencies themselves, where the result depends on the sine's phase), and its
// phase is exact only where nothing is folded. f outside [0, fs/2] is first folded at fs.
func (b *FilterBank) Response(i int, f float64) complex128 {
	w := b.where[i]
	h := complex(1, 0)
	f, h = bankFold(f, b.fs, h)
	if w.stage == b.chain {
		h *= b.stages[0].dec.responseHigh(f, b.fs)
		f, h = bankFold(f, b.fs/2, h)
		st := &b.stages[w.stage]
		flt := &st.filters[w.filter]
		return h * complex(flt.gain, 0) * CascadeResponse(flt.sec, f, st.rate)
	}
	for k := 0; k < w.stage; k++ {
		st := &b.stages[k]
		h *= st.dec.response(f, st.rate)
		f, h = bankFold(f, st.rate/2, h)
	}
	st := &b.stages[w.stage]
	flt := &st.filters[w.filter]
	return h * complex(flt.gain, 0) * CascadeResponse(flt.sec, f, st.rate)
}

// bankFold returns the frequency in [0, fs/2] at which a sine of frequency f appears when
// sampled at rate fs, and the response h conjugated if sampling reverses the sine's phase.
func bankFold(f, fs float64, h complex128) (float64, complex128) {
	r := f - fs*math.Round(f/fs)
	if r < 0 {
		return -r, cmplx.Conj(h)
	}
	return r, h
}

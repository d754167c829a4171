package wav

import (
	"encoding/binary"
)

// The helpers below build WAV files byte by byte from the layout of the RIFF WAVE format
// (Microsoft "Multimedia Programming Interface and Data Specifications 1.0", 1991, and the
// WAVEFORMATEXTENSIBLE definition in the Windows SDK's mmreg.h/ksmedia.h), independently of
// the package's Writer, so the reader is tested against the format and not against itself.

type chunk struct {
	id   string
	body []byte
	size int64 // declared size; -1 means len(body)
	pad  bool  // write the pad byte after an odd body
}

func ck(id string, body []byte) chunk { return chunk{id: id, body: body, size: -1, pad: true} }

// riffFile assembles a file; riffSize < 0 writes the true size.
func riffFile(magic string, riffSize int64, chunks ...chunk) []byte {
	var b []byte
	b = append(b, magic...)
	b = append(b, 0, 0, 0, 0)
	b = append(b, "WAVE"...)
	for _, c := range chunks {
		b = append(b, c.id...)
		size := c.size
		if size < 0 {
			size = int64(len(c.body))
		}
		b = binary.LittleEndian.AppendUint32(b, uint32(size))
		b = append(b, c.body...)
		if c.pad && len(c.body)%2 == 1 {
			b = append(b, 0)
		}
	}
	if riffSize < 0 {
		riffSize = int64(len(b) - 8)
	}
	binary.LittleEndian.PutUint32(b[4:], uint32(riffSize))
	return b
}

// fmtBody is a 16-byte WAVEFORMAT (PCMWAVEFORMAT) body.
func fmtBody(tag, channels uint16, rate uint32, blockAlign, bits uint16) []byte {
	b := binary.LittleEndian.AppendUint16(nil, tag)
	b = binary.LittleEndian.AppendUint16(b, channels)
	b = binary.LittleEndian.AppendUint32(b, rate)
	b = binary.LittleEndian.AppendUint32(b, rate*uint32(blockAlign))
	b = binary.LittleEndian.AppendUint16(b, blockAlign)
	b = binary.LittleEndian.AppendUint16(b, bits)
	return b
}

// fmtExtBody is a 40-byte WAVEFORMATEXTENSIBLE body with sub-format GUID
// {subTag}-0000-0010-8000-00AA00389B71 (KSDATAFORMAT_SUBTYPE_PCM is 1, _IEEE_FLOAT is 3).
func fmtExtBody(channels uint16, rate uint32, container, valid uint16, mask uint32, subTag uint16) []byte {
	b := fmtBody(0xFFFE, channels, rate, channels*container/8, container)
	b = binary.LittleEndian.AppendUint16(b, 22)
	b = binary.LittleEndian.AppendUint16(b, valid)
	b = binary.LittleEndian.AppendUint32(b, mask)
	b = binary.LittleEndian.AppendUint16(b, subTag)
	b = append(b, 0x00, 0x00, 0x00, 0x00, 0x10, 0x00, 0x80, 0x00, 0x00, 0xAA, 0x00, 0x38, 0x9B, 0x71)
	return b
}

// pcm16 encodes integer samples as 16-bit little-endian.
func pcm16(v ...int16) []byte {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint16(b, uint16(x))
	}
	return b
}

// pcm24 encodes integer samples as 24-bit little-endian.
func pcm24(v ...int32) []byte {
	var b []byte
	for _, x := range v {
		b = append(b, byte(x), byte(x>>8), byte(x>>16))
	}
	return b
}

func pcm32(v ...int32) []byte {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, uint32(x))
	}
	return b
}

func f32bits(v ...uint32) []byte {
	var b []byte
	for _, x := range v {
		b = binary.LittleEndian.AppendUint32(b, x)
	}
	return b
}

// minimal16 is a valid 48 kHz mono 16-bit file of four samples.
func minimal16() []byte {
	return riffFile("RIFF", -1,
		ck("fmt ", fmtBody(1, 1, 48000, 2, 16)),
		ck("data", pcm16(0, 16384, -32768, 32767)))
}

package train

import (
	"encoding/base64"
	le "encoding/binary"
	"encoding/json"
	"hash/fnv"
	"slices"

	"convtag/model/token"
)

// MetaSeen is the model-file metadata key that records which texts
// training used: 32-bit hashes of the training and dev records' tokens, so
// that eval can say when it is scoring records the model was fitted or
// stopped on.
const MetaSeen = "seen_texts"

// seenTexts is MetaSeen's JSON: sorted little-endian uint32 hashes, base64.
type seenTexts struct {
	Hash  string `json:"hash"`
	Train string `json:"train"`
	Dev   string `json:"dev"`
}

const seenHashName = "fnv1a-32 of the tokens joined by NUL"

// textHash hashes a text's tokens, so spacing and case do not hide a
// record that training saw.
func textHash(tok *token.Tokenizer, ts *token.Tokens, text string) uint32 {
	tok.Tokenize(ts, []byte(text))
	h := fnv.New32a()
	for i := range ts.Len() {
		if i > 0 {
			h.Write([]byte{0})
		}
		h.Write(ts.At(i))
	}
	return h.Sum32()
}

func encodeHashes(hs []uint32) string {
	slices.Sort(hs)
	hs = slices.Compact(hs)
	b := make([]byte, 4*len(hs))
	for i, h := range hs {
		le.LittleEndian.PutUint32(b[4*i:], h)
	}
	return base64.StdEncoding.EncodeToString(b)
}

func decodeHashes(s string) []uint32 {
	b, err := base64.StdEncoding.DecodeString(s)
	if err != nil || len(b)%4 != 0 {
		return nil
	}
	hs := make([]uint32, len(b)/4)
	for i := range hs {
		hs[i] = le.LittleEndian.Uint32(b[4*i:])
	}
	return hs
}

// SeenMeta is MetaSeen's value for the training and dev texts.
func SeenMeta(train, dev []string) string {
	tok := token.New(token.Settings{})
	var ts token.Tokens
	hash := func(texts []string) string {
		hs := make([]uint32, len(texts))
		for i, t := range texts {
			hs[i] = textHash(tok, &ts, t)
		}
		return encodeHashes(hs)
	}
	b, _ := json.Marshal(seenTexts{Hash: seenHashName, Train: hash(train), Dev: hash(dev)})
	return string(b)
}

// CountSeen counts how many of texts the model's training saw among its
// training records and its dev records (meta is the model's MetaSeen
// value); ok is false when the model file does not say.
func CountSeen(meta string, tok *token.Tokenizer, texts []string) (inTrain, inDev int, ok bool) {
	var s seenTexts
	if json.Unmarshal([]byte(meta), &s) != nil || s.Hash != seenHashName {
		return 0, 0, false
	}
	train, dev := decodeHashes(s.Train), decodeHashes(s.Dev)
	var ts token.Tokens
	for _, t := range texts {
		h := textHash(tok, &ts, t)
		if _, found := slices.BinarySearch(train, h); found {
			inTrain++
		} else if _, found := slices.BinarySearch(dev, h); found {
			inDev++
		}
	}
	return inTrain, inDev, true
}

package adjust

import (
	"encoding/binary"
	"hash/maphash"
)

// names numbers point names in the order they are first seen. It is an
// open-addressing hash table whose 16-byte slots hold the first 8 bytes of
// the name, its length and part of its hash, so that a name of up to 8 bytes
// (the usual designations) is found with a single memory access.
type names struct {
	list  []string
	slots []nameSlot
	mask  uint64
	seed  maphash.Seed
}

type nameSlot struct {
	prefix uint64
	tag    uint32 // hash bits | length; 0 = empty
	id     uint32
}

func (t *names) init(n int) {
	t.list = make([]string, 0, n)
	size := 16
	for 3*size < 4*n { // load at most 3/4: a small table is a fast one
		size <<= 1
	}
	t.slots = make([]nameSlot, size)
	t.mask = uint64(size - 1)
	t.seed = maphash.MakeSeed()
}

func key(s string) (prefix uint64, tag uint32) {
	var b [8]byte
	copy(b[:], s)
	prefix = binary.LittleEndian.Uint64(b[:])
	return prefix, uint32(min(len(s), 255)) | 1<<8
}

// find returns the slot of s and whether s is there.
func (t *names) find(s string, h uint64) (uint64, bool) {
	prefix, tag := key(s)
	tag |= uint32(h>>32) &^ 0x1ff
	for i := h & t.mask; ; i = (i + 1) & t.mask {
		sl := &t.slots[i]
		if sl.tag == 0 {
			return i, false
		}
		if sl.tag == tag && sl.prefix == prefix && (len(s) <= 8 || t.list[sl.id] == s) {
			return i, true
		}
	}
}

// lookup returns the number of s, or false.
func (t *names) lookup(s string) (int32, bool) {
	if t.slots == nil {
		return 0, false
	}
	i, ok := t.find(s, maphash.String(t.seed, s))
	return int32(t.slots[i].id), ok
}

// intern returns the number of s, numbering it if new. s is copied, so a
// caller's larger buffer is not kept alive.
func (t *names) intern(s string) int32 {
	if t.slots == nil {
		t.init(16)
	}
	h := maphash.String(t.seed, s)
	i, ok := t.find(s, h)
	if ok {
		return int32(t.slots[i].id)
	}
	if 4*(len(t.list)+1) > 3*len(t.slots) {
		t.grow()
		i, _ = t.find(s, h)
	}
	id := uint32(len(t.list))
	t.list = append(t.list, string([]byte(s)))
	prefix, tag := key(s)
	t.slots[i] = nameSlot{prefix: prefix, tag: tag | uint32(h>>32)&^0x1ff, id: id}
	return int32(id)
}

func (t *names) grow() {
	old := t.list
	t.slots = make([]nameSlot, 2*len(t.slots))
	t.mask = uint64(len(t.slots) - 1)
	for id, s := range old {
		h := maphash.String(t.seed, s)
		i, _ := t.find(s, h)
		prefix, tag := key(s)
		t.slots[i] = nameSlot{prefix: prefix, tag: tag | uint32(h>>32)&^0x1ff, id: uint32(id)}
	}
}

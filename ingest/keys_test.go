package ingest

import (
	"reflect"
	"testing"
)

func TestKeySeqRestart(t *testing.T) {
	var k keySeq
	// steps 0,10,...,150 then a restart from 100 to 200
	idx := 0
	for s := int64(0); s <= 150; s += 10 {
		k.push(idx, s)
		idx++
	}
	dropped := k.truncateFrom(100)
	for s := int64(100); s <= 200; s += 10 {
		k.push(idx, s)
		idx++
	}
	if !reflect.DeepEqual(dropped, [][2]int{{10, 16}}) {
		t.Errorf("dropped = %v", dropped)
	}
	var keys []int64
	k.iter(func(_ int, key int64) bool { keys = append(keys, key); return true })
	if len(keys) != 21 || keys[9] != 90 || keys[10] != 100 || keys[20] != 200 || k.n != 21 {
		t.Errorf("keys = %v (n %d)", keys, k.n)
	}
	if len(k.runs) > 3 {
		t.Errorf("runs = %d, want few", len(k.runs))
	}
	var sub keySeq
	sub.push(0, 0)
	sub.push(1, 50)
	sub.push(2, 200)
	if ok, _ := contains(&k, &sub); !ok {
		t.Error("subset not found")
	}
	sub.push(3, 205)
	if ok, miss := contains(&k, &sub); ok || miss != 205 {
		t.Errorf("contains = %v %d", ok, miss)
	}
}

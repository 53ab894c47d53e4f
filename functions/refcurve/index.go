package refcurve

import (
	"cmp"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"math"
	"slices"
	"strconv"
)

// rowIndex orders rows canonically without comparing strings per row:
// worker and group names are interned once and ranked by byte order.
type rowIndex struct {
	// order lists row indexes sorted by worker name, then time.
	order []int32
	// wid and gid are per-row worker and group ids (order of first
	// appearance); wrank and grank give each id's rank by name.
	wid, gid     []int32
	wrank, grank []int32
	workers      []string // by id
	groups       []string // by id
}

// indexRows validates rows (worker id present, finite time and value, one
// exam per worker and time) and orders them. Every problem is collected in
// a *RowErrors.
func indexRows(rows []Row) (*rowIndex, error) {
	var errs RowErrors
	n := len(rows)
	ix := &rowIndex{wid: make([]int32, n), gid: make([]int32, n)}
	wmap := map[string]int32{}
	gmap := map[string]int32{}
	prevW, prevWID := "", int32(-1)
	prevG, prevGID := "", int32(-1)
	for i := range rows {
		r := &rows[i]
		if r.Worker == "" {
			errs.add(&RowError{Rows: []int{i + 1}, Column: "worker", Reason: "the worker id is empty"})
		}
		if math.IsNaN(r.Time) || math.IsInf(r.Time, 0) {
			errs.add(&RowError{Rows: []int{i + 1}, Column: "time", Reason: "age is " + strconv.FormatFloat(r.Time, 'g', -1, 64) + "; expected a finite number of years"})
		}
		if math.IsNaN(r.Value) || math.IsInf(r.Value, 0) {
			errs.add(&RowError{Rows: []int{i + 1}, Column: "value", Reason: "value is " + strconv.FormatFloat(r.Value, 'g', -1, 64) + "; expected a finite number"})
		}
		// Rows usually come grouped by worker: skip the map when the id
		// repeats.
		if prevWID >= 0 && r.Worker == prevW {
			ix.wid[i] = prevWID
		} else {
			id, ok := wmap[r.Worker]
			if !ok {
				id = int32(len(ix.workers))
				wmap[r.Worker] = id
				ix.workers = append(ix.workers, r.Worker)
			}
			ix.wid[i], prevW, prevWID = id, r.Worker, id
		}
		if prevGID >= 0 && r.Group == prevG {
			ix.gid[i] = prevGID
		} else {
			id, ok := gmap[r.Group]
			if !ok {
				id = int32(len(ix.groups))
				gmap[r.Group] = id
				ix.groups = append(ix.groups, r.Group)
			}
			ix.gid[i], prevG, prevGID = id, r.Group, id
		}
	}
	if errs.Count > 0 {
		return nil, &errs
	}
	ix.wrank = ranks(ix.workers)
	ix.grank = ranks(ix.groups)

	// Counting sort by worker rank, then sort each worker's rows by time.
	nw := len(ix.workers)
	start := make([]int32, nw+1)
	for i := 0; i < n; i++ {
		start[ix.wrank[ix.wid[i]]+1]++
	}
	for k := 1; k <= nw; k++ {
		start[k] += start[k-1]
	}
	ix.order = make([]int32, n)
	fill := slices.Clone(start[:nw])
	for i := 0; i < n; i++ {
		r := ix.wrank[ix.wid[i]]
		ix.order[fill[r]] = int32(i)
		fill[r]++
	}
	byTime := func(a, b int32) int {
		if c := cmp.Compare(rows[a].Time, rows[b].Time); c != 0 {
			return c
		}
		if c := cmp.Compare(ix.grank[ix.gid[a]], ix.grank[ix.gid[b]]); c != 0 {
			return c
		}
		if c := cmp.Compare(rows[a].Value, rows[b].Value); c != 0 {
			return c
		}
		return cmp.Compare(a, b)
	}
	for k := 0; k < nw; k++ {
		blk := ix.order[start[k]:start[k+1]]
		if len(blk) <= 16 {
			for i := 1; i < len(blk); i++ {
				for j := i; j > 0 && byTime(blk[j], blk[j-1]) < 0; j-- {
					blk[j], blk[j-1] = blk[j-1], blk[j]
				}
			}
		} else {
			slices.SortFunc(blk, byTime)
		}
		for i := 1; i < len(blk); i++ {
			a, b := blk[i-1], blk[i]
			if rows[a].Time == rows[b].Time {
				lo, hi := min(a, b), max(a, b)
				errs.add(&DuplicateError{Worker: rows[a].Worker, Time: rows[a].Time, Rows: [2]int{int(lo) + 1, int(hi) + 1}, Same: rows[a].Value == rows[b].Value})
			}
		}
	}
	if err := errs.err(); err != nil {
		return nil, err
	}
	return ix, nil
}

// ranks returns each name's position in byte order.
func ranks(names []string) []int32 {
	ids := make([]int32, len(names))
	for i := range ids {
		ids[i] = int32(i)
	}
	slices.SortFunc(ids, func(a, b int32) int { return cmp.Compare(names[a], names[b]) })
	r := make([]int32, len(names))
	for pos, id := range ids {
		r[id] = int32(pos)
	}
	return r
}

// byGroup returns the row indexes sorted by group, worker and time (a
// stable counting sort of order by group rank), with the start of each
// group's block in group-rank order.
func (ix *rowIndex) byGroup() (order []int32, start []int) {
	ng := len(ix.groups)
	start = make([]int, ng+1)
	for _, i := range ix.order {
		start[ix.grank[ix.gid[i]]+1]++
	}
	for k := 1; k <= ng; k++ {
		start[k] += start[k-1]
	}
	order = make([]int32, len(ix.order))
	fill := slices.Clone(start[:ng])
	for _, i := range ix.order {
		g := ix.grank[ix.gid[i]]
		order[fill[g]] = i
		fill[g]++
	}
	return order, start
}

// dataHash is the SHA-256 of the rows in canonical order (group, worker,
// time): for each (group, worker) block its two names, length-prefixed,
// and the count of its exams, then every (time, value) as IEEE-754 bits.
// Row order in the input does not matter; any change of a name or number
// does.
func dataHash(rows []Row, order []int32, ix *rowIndex) string {
	h := sha256.New()
	buf := make([]byte, 0, 1<<16)
	flush := func() {
		h.Write(buf)
		buf = buf[:0]
	}
	putStr := func(s string) {
		buf = binary.LittleEndian.AppendUint64(buf, uint64(len(s)))
		buf = append(buf, s...)
	}
	for a := 0; a < len(order); {
		b := a + 1
		for b < len(order) && ix.wid[order[b]] == ix.wid[order[a]] && ix.gid[order[b]] == ix.gid[order[a]] {
			b++
		}
		r := rows[order[a]]
		putStr(r.Group)
		putStr(r.Worker)
		buf = binary.LittleEndian.AppendUint64(buf, uint64(b-a))
		for k := a; k < b; k++ {
			rk := rows[order[k]]
			buf = binary.LittleEndian.AppendUint64(buf, math.Float64bits(rk.Time))
			buf = binary.LittleEndian.AppendUint64(buf, math.Float64bits(rk.Value))
		}
		if len(buf) > 1<<15 {
			flush()
		}
		a = b
	}
	flush()
	return "sha256:" + hex.EncodeToString(h.Sum(nil))
}

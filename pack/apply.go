package pack

import (
	"math"

	"packwatch/bus"
	"packwatch/decode"
)

// apply runs one message through the pack: due aggregate ticks and timers
// first (they see the state before this message), then the decoder, then
// the checks of each slot it updated. Allocation-free unless an alarm opens.
func (ps *packState) apply(msg *bus.Message, ids *uint64) {
	src := int(msg.Src)
	if ps.srcMap != nil {
		if src >= len(ps.srcMap) || ps.srcMap[src] < 0 {
			return
		}
		src = ps.srcMap[src]
	} else if src >= ps.nsrc {
		return
	}
	t := msg.T
	if t > ps.dataT {
		ps.dataT = t
	}
	// Data time reaching the next grid point runs the aggregate tick; data
	// time stepping back more than a second behind the last tick (a source
	// restarted its clock) restarts the grid there.
	if t >= ps.nextAgg || t < ps.nextAgg-ps.aggPeriod-secondNs {
		ps.tick(t, ids)
	}
	if t >= ps.nextDue {
		ps.runDue(t, ids)
	}
	if src == int(msg.Src) {
		ps.m.Decode(msg, ps.v)
	} else {
		m := *msg
		m.Src = uint16(src)
		ps.m.Decode(&m, ps.v)
	}
	if msg.Kind == bus.KindGap && src == ps.curSrc {
		ps.counter.Break()
		ps.soc.gap()
	}
	for _, s := range ps.v.Updated {
		ps.update(s, ids)
	}
	ps.v.Updated = ps.v.Updated[:0]
}

// update handles one slot the decoder just wrote.
func (ps *packState) update(s int32, ids *uint64) {
	v := ps.v
	t, flag, val := v.T[s], v.Flag[s], v.V[s]
	ps.updates++
	h := &ps.hot[s]
	if isFault := flag == decode.FlagFault; isFault != h.fault {
		h.fault = isFault
		if isFault {
			ps.faults++
			ps.openFault(s, t, val, ids)
		} else {
			ps.closeFault(s)
		}
	}
	switch h.role {
	case roleCurrent:
		if flag != decode.FlagOK {
			ps.counter.Break()
			ps.soc.gap()
			break
		}
		if gapsBefore := ps.counter.Gaps; !ps.counter.Add(t, val, ps.voltageNow(t)) && ps.counter.Gaps > gapsBefore {
			ps.soc.gap()
		}
		ps.charging = val > ps.deadband
		if math.Abs(val) <= ps.deadband {
			if !ps.soc.resting {
				ps.soc.resting, ps.soc.restSince = true, t
			}
		} else {
			ps.soc.resting = false
		}
	case roleSerial:
		if flag == decode.FlagOK {
			if ps.serialOK && v.Raw[s] != ps.serial {
				ps.resetCounted()
			}
			ps.serial, ps.serialOK = v.Raw[s], true
		}
	case roleSOC:
		if flag == decode.FlagOK && ps.soc.mode == socBMS && val >= 0 && val <= 100 {
			ps.soc.anchor(val/100, ps.counter.NetAs, false)
		}
	}
	// The slot's checks sit together in ps.checks; the reading is fresh.
	ok := flag == decode.FlagOK
	if ok && h.notOK == 0 {
		ch := 0
		if ps.charging {
			ch = 1
		}
		if b := &h.band[ch]; val >= b[0] && val <= b[1] {
			// Every check ok and staying ok: nothing changes. c.value is
			// only read for checks off ok (runDue, trip alarms).
			return
		}
	}
	for k := h.ck0; k < h.ck1; k++ {
		c := &ps.checks[k]
		if !ok {
			c.value = nan
			ps.stepCheck(c, nan, t, ids)
			continue
		}
		c.value = val
		m := c.spec.bound - val
		if !c.spec.upper {
			m = -m
		}
		if c.charge && !ps.charging {
			m = math.MaxFloat64
		}
		// Fast path: ok and staying ok changes nothing (no timer runs at ok).
		if c.tr.Level == LevelOK && m >= c.spec.rule.Warn {
			continue
		}
		ps.stepCheck(c, m, t, ids)
	}
}

// resetCounted clears counted charge and energy and the start of the count
// (pack.serial changed: another pack).
func (ps *packState) resetCounted() {
	ps.counter.Reset()
	ps.soc.restart()
}

// voltageNow is the pack voltage for the energy count: reported when fresh,
// else the sum of the cells when every cell reported at the last tick.
func (ps *packState) voltageNow(t int64) float64 {
	if ps.fresh(ps.voltSlot, t) {
		return ps.v.V[ps.voltSlot]
	}
	if ps.agg.n == len(ps.cellSlot) && ps.agg.n > 0 {
		return ps.agg.sum
	}
	return nan
}

// slotMargin is the margin of a per-reading check at data time t from its
// slot's current reading: NaN when there is no valid fresh reading, and far
// inside for the charge temperature window while not charging.
func (ps *packState) slotMargin(c *check, t int64) float64 {
	s := c.slot
	if ps.v.Flag[s] != decode.FlagOK || ps.stale(s, t) {
		c.value = nan
		return nan
	}
	c.value = ps.v.V[s]
	if c.charge && !ps.charging {
		return math.MaxFloat64
	}
	return c.spec.margin(c.value)
}

// stepCheck advances a check's timer and opens or closes its alarm.
func (ps *packState) stepCheck(c *check, margin float64, t int64, ids *uint64) {
	r := &c.spec.rule
	wasOK := c.tr.Level == LevelOK
	ev := c.tr.Step(margin, t, r)
	if isOK := c.tr.Level == LevelOK; isOK != wasOK && c.slot >= 0 {
		if isOK {
			ps.hot[c.slot].notOK--
		} else {
			ps.hot[c.slot].notOK++
		}
	}
	switch ev {
	case EventTripped:
		*ids++
		c.alarm = *ids
		ps.alarms = append(ps.alarms, alarm{id: *ids, lim: c.lim, slot: c.slot, subj: c.subj,
			since: c.tr.PastSince, value: c.value, active: true})
	case EventCleared:
		ps.endAlarm(c.alarm)
		c.alarm = 0
	}
	if d := c.tr.Due(r); d < ps.nextDue {
		ps.nextDue = d
	}
}

// runDue re-evaluates every check whose timer ends by t with the reading it
// holds, so a trip comes at trip_after on data time even between updates.
func (ps *packState) runDue(t int64, ids *uint64) {
	ps.nextDue = never
	for i := range ps.checks {
		c := &ps.checks[i]
		r := &c.spec.rule
		if c.tr.Due(r) <= t {
			m := nan
			if c.slot >= 0 {
				m = ps.slotMargin(c, t)
			} else if !math.IsNaN(c.value) {
				m = c.spec.margin(c.value)
			}
			ps.stepCheck(c, m, t, ids)
		} else if d := c.tr.Due(r); d < ps.nextDue {
			ps.nextDue = d
		}
	}
}

func (ps *packState) openFault(s int32, t int64, val float64, ids *uint64) {
	*ids++
	ps.alarms = append(ps.alarms, alarm{id: *ids, fault: true, slot: s,
		subj: int32(ps.slots[s].Bind.Index), since: t, value: val, active: true})
}

func (ps *packState) closeFault(s int32) {
	for i := range ps.alarms {
		if a := &ps.alarms[i]; a.fault && a.slot == s && a.active {
			ps.endAlarm(a.id)
			return
		}
	}
}

// endAlarm marks an alarm inactive; an acknowledged one leaves the list.
func (ps *packState) endAlarm(id uint64) {
	for i := range ps.alarms {
		if ps.alarms[i].id != id {
			continue
		}
		if ps.alarms[i].acked {
			ps.alarms = append(ps.alarms[:i], ps.alarms[i+1:]...)
		} else {
			ps.alarms[i].active = false
		}
		return
	}
}

func (ps *packState) ack(id uint64) bool {
	for i := range ps.alarms {
		if ps.alarms[i].id != id {
			continue
		}
		if ps.alarms[i].active {
			ps.alarms[i].acked = true
		} else {
			ps.alarms = append(ps.alarms[:i], ps.alarms[i+1:]...)
		}
		return true
	}
	return false
}

func (ps *packState) ackAll() {
	kept := ps.alarms[:0]
	for _, a := range ps.alarms {
		if a.active {
			a.acked = true
			kept = append(kept, a)
		}
	}
	ps.alarms = kept
}

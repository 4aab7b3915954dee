package service

import (
	"math"

	"google.golang.org/protobuf/encoding/protowire"
	"google.golang.org/protobuf/proto"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// slotInbox is the receive buffer of one Lockstep stream, reused for every
// slot message so that the per-slot path allocates nothing.
//
// lenientCodec decodes into it with decode: a slot message of the common
// forms (slot index, SIRs packed or not, block results, inactive and
// leaving users) is read straight from the wire format into reused slices
// (protowire; the encoding of https://protobuf.dev/programming-guides/encoding/);
// anything else (a configuration, joining users, unknown or repeated
// top-level fields, malformed bytes) goes through proto.Unmarshal into the
// embedded LockstepRequest, which also makes a slotInbox a proto.Message
// that any other proto codec can fill. Both ways give the same message
// (TestSlotInboxMatchesProto).
type slotInbox struct {
	*pb.LockstepRequest // generic decoding target

	fast      bool // the last decode took the wire path: message is fastReq
	fastReq   pb.LockstepRequest
	fastWrap  pb.LockstepRequest_Slot
	fastSlot  pb.LockstepSlot
	blockPool []*pb.BlockResult // reused block results, fastSlot.Blocks points into it
}

func newSlotInbox() *slotInbox {
	in := &slotInbox{LockstepRequest: &pb.LockstepRequest{}}
	in.fastWrap.Slot = &in.fastSlot
	in.fastReq.Message = &in.fastWrap
	return in
}

// prepare readies the inbox for the next RecvMsg.
func (in *slotInbox) prepare() { in.fast = false }

// message is the request decoded last; it stays valid until the next
// RecvMsg into the inbox.
func (in *slotInbox) message() *pb.LockstepRequest {
	if in.fast {
		return &in.fastReq
	}
	return in.LockstepRequest
}

// decode reads one LockstepRequest in wire format (see slotInbox).
func (in *slotInbox) decode(b []byte) error {
	if in.decodeSlot(b) {
		in.fast = true
		return nil
	}
	in.fast = false
	return proto.Unmarshal(b, in.LockstepRequest)
}

// Field numbers of LockstepRequest, LockstepSlot and BlockResult.
const (
	wireRequestSlot  = 2
	wireSlotSlot     = 1
	wireSlotSIR      = 2
	wireSlotBlocks   = 3
	wireSlotInactive = 4
	wireSlotLeave    = 6
	wireBlockUser    = 1
	wireBlockError   = 2
	wireFixed64Bytes = 8
)

// decodeSlot decodes b into fastSlot if b is a LockstepRequest holding
// exactly one slot field in a form it handles; it reports false (leaving
// fastSlot in any state) otherwise.
func (in *slotInbox) decodeSlot(b []byte) bool {
	num, typ, n := protowire.ConsumeTag(b)
	if n < 0 || num != wireRequestSlot || typ != protowire.BytesType {
		return false
	}
	b = b[n:]
	body, n := protowire.ConsumeBytes(b)
	if n < 0 || n != len(b) {
		return false // malformed, or more top-level fields: proto.Unmarshal merges them
	}
	s := &in.fastSlot
	s.Slot = 0
	s.SirDb = s.SirDb[:0]
	s.Blocks = s.Blocks[:0]
	s.InactiveUsers = s.InactiveUsers[:0]
	s.JoinUsers = nil
	s.LeaveUsers = s.LeaveUsers[:0]
	for len(body) > 0 {
		num, typ, n := protowire.ConsumeTag(body)
		if n < 0 {
			return false
		}
		body = body[n:]
		switch {
		case num == wireSlotSlot && typ == protowire.VarintType:
			v, n := protowire.ConsumeVarint(body)
			if n < 0 {
				return false
			}
			s.Slot = int64(v)
			body = body[n:]
		case num == wireSlotSIR && typ == protowire.BytesType:
			p, n := protowire.ConsumeBytes(body)
			if n < 0 || len(p)%wireFixed64Bytes != 0 {
				return false
			}
			for ; len(p) > 0; p = p[wireFixed64Bytes:] {
				v, _ := protowire.ConsumeFixed64(p)
				s.SirDb = append(s.SirDb, math.Float64frombits(v))
			}
			body = body[n:]
		case num == wireSlotSIR && typ == protowire.Fixed64Type:
			v, n := protowire.ConsumeFixed64(body)
			if n < 0 {
				return false
			}
			s.SirDb = append(s.SirDb, math.Float64frombits(v))
			body = body[n:]
		case num == wireSlotBlocks && typ == protowire.BytesType:
			p, n := protowire.ConsumeBytes(body)
			if n < 0 || !in.appendBlock(p) {
				return false
			}
			body = body[n:]
		case num == wireSlotInactive || num == wireSlotLeave:
			list := &s.InactiveUsers
			if num == wireSlotLeave {
				list = &s.LeaveUsers
			}
			n := consumeInt32s(body, typ, list)
			if n < 0 {
				return false
			}
			body = body[n:]
		default:
			return false // joining users, unknown fields, other wire types
		}
	}
	return true
}

// appendBlock decodes one BlockResult into a reused message.
func (in *slotInbox) appendBlock(b []byte) bool {
	s := &in.fastSlot
	k := len(s.Blocks)
	if k == len(in.blockPool) {
		in.blockPool = append(in.blockPool, &pb.BlockResult{})
	}
	r := in.blockPool[k]
	r.User, r.Error = 0, false
	for len(b) > 0 {
		num, typ, n := protowire.ConsumeTag(b)
		if n < 0 || typ != protowire.VarintType || (num != wireBlockUser && num != wireBlockError) {
			return false
		}
		b = b[n:]
		v, n := protowire.ConsumeVarint(b)
		if n < 0 {
			return false
		}
		b = b[n:]
		if num == wireBlockUser {
			r.User = int32(v)
		} else {
			r.Error = v != 0
		}
	}
	s.Blocks = append(s.Blocks, r)
	return true
}

// consumeInt32s appends one repeated int32 field occurrence (packed or
// not) to list and returns the bytes read, or -1.
func consumeInt32s(b []byte, typ protowire.Type, list *[]int32) int {
	switch typ {
	case protowire.VarintType:
		v, n := protowire.ConsumeVarint(b)
		if n < 0 {
			return -1
		}
		*list = append(*list, int32(v))
		return n
	case protowire.BytesType:
		p, n := protowire.ConsumeBytes(b)
		if n < 0 {
			return -1
		}
		for len(p) > 0 {
			v, m := protowire.ConsumeVarint(p)
			if m < 0 {
				return -1
			}
			*list = append(*list, int32(v))
			p = p[m:]
		}
		return n
	}
	return -1
}

package callgraph

import (
	"github.com/culprithq/culprit/traces"
)

// NodeID identifies a Tree node. The root is node 0, a virtual node above
// every path's first frame. A child's ID is always greater than its parent's.
type NodeID int32

// Root is the ID of the tree's virtual root.
const Root NodeID = 0

type treeNode struct {
	frame       traces.FrameID
	parent      NodeID
	firstChild  NodeID // 0 = none (the root is never a child)
	nextSibling NodeID
	depth       int32
}

// listedChildren is how many children of a node are found by walking its
// sibling list; the children of nodes with more are also in the tree's
// index map. Most nodes have one or two children: walking a short list is
// cheaper than hashing, and keeps the map small.
const listedChildren = 8

// Tree is a calling-context tree. Build one with NewTree. The values stay
// on the source's paths: each path maps to its leaf node (Leaf), and
// whoever needs a node's value adds up the paths through it.
type Tree struct {
	src   *traces.Source
	nodes [][]treeNode // chunks of nodeChunk nodes
	n     int          // nodes
	leaf  []NodeID
}

// TreeOptions control NewTree. The zero value keeps every frame.
type TreeOptions struct {
	// Keep, when set, returns how many leading frames of a path the tree
	// needs (at least one): the path ends there, and its value goes to
	// that node. Attribution keeps a path down to its first database or
	// network frame, since everything below belongs to the call, and a
	// path that reaches none down to the frames that name its entry
	// point: the tree stays small for deep driver stacks and CPU-only
	// samples.
	Keep func(frames []traces.FrameID) int
}

// NewTree merges the paths of src by common prefix.
func NewTree(src *traces.Source, opts TreeOptions) *Tree {
	t := &Tree{src: src, leaf: make([]NodeID, src.Paths.Len())}
	t.newNode(treeNode{}) // the root
	b := treeBuilder{t: t, index: map[uint64]NodeID{}, children: make([]uint8, 1, 64)}
	// Consecutive paths usually share a prefix (sibling spans of a trace,
	// samples of one request): reuse the previous path's nodes for the
	// common prefix and look up only the rest.
	var prevFrames []traces.FrameID
	var prevNodes []NodeID
	// Paths that share stored frames (an execution trace's waits at one
	// stack) share their leaf: it is looked up once.
	var leafOf map[uint64]NodeID
	if src.Paths.Shared() {
		leafOf = map[uint64]NodeID{}
	}
	for pi := range src.Paths.Len() {
		var key uint64
		if leafOf != nil {
			key = src.Paths.FrameKey(pi)
			if n, ok := leafOf[key]; ok {
				t.leaf[pi] = n
				continue
			}
		}
		frames := src.Paths.Frames(pi)
		if opts.Keep != nil && len(frames) > 0 {
			frames = frames[:min(max(opts.Keep(frames), 1), len(frames))]
		}
		cur := Root
		common := 0
		for common < len(prevNodes) && common < len(frames) && frames[common] == prevFrames[common] {
			common++
		}
		if common > 0 {
			cur = prevNodes[common-1]
		}
		prevFrames = frames
		prevNodes = prevNodes[:common]
		fresh := false // cur was just created: it has no children to look up
		for _, f := range frames[common:] {
			child := NodeID(0)
			if !fresh {
				child = b.child(cur, f)
			}
			if child == 0 {
				child = b.add(cur, f)
				fresh = true
			}
			cur = child
			prevNodes = append(prevNodes, cur)
		}
		t.leaf[pi] = cur
		if leafOf != nil {
			leafOf[key] = cur
		}
	}
	return t
}

// treeBuilder finds and adds children while NewTree runs.
type treeBuilder struct {
	t *Tree
	// index holds (parent, frame) → child for the children of nodes with
	// more than listedChildren children.
	index map[uint64]NodeID
	// children counts each node's children, up to listedChildren+2.
	children []uint8
}

// nodeChunk is how many nodes a chunk holds: nodes are allocated as the
// tree grows, never copied (a bound computed ahead overestimated the
// nodes of a million spans by 75%, and growing one slice would copy it).
const (
	nodeShift = 15
	nodeChunk = 1 << nodeShift
)

// node returns node n.
func (t *Tree) node(n NodeID) *treeNode { return &t.nodes[n>>nodeShift][n&(nodeChunk-1)] }

// newNode appends v and returns its ID.
func (t *Tree) newNode(v treeNode) NodeID {
	id := NodeID(t.n)
	if t.n%nodeChunk == 0 {
		size := nodeChunk
		if t.n == 0 {
			size = 64 // a small tree stays small: the first chunk grows as a slice does
		}
		t.nodes = append(t.nodes, make([]treeNode, 0, size))
	}
	c := &t.nodes[len(t.nodes)-1]
	*c = append(*c, v)
	t.n++
	return id
}

func childKey(parent NodeID, f traces.FrameID) uint64 {
	return uint64(uint32(parent))<<32 | uint64(uint32(f))
}

// child returns the child of parent with frame f, 0 if there is none.
func (b *treeBuilder) child(parent NodeID, f traces.FrameID) NodeID {
	t := b.t
	if b.children[parent] > listedChildren {
		return b.index[childKey(parent, f)]
	}
	for c := t.node(parent).firstChild; c != 0; {
		n := t.node(c)
		if n.frame == f {
			return c
		}
		c = n.nextSibling
	}
	return 0
}

// add appends a child of parent with frame f and returns it.
func (b *treeBuilder) add(parent NodeID, f traces.FrameID) NodeID {
	t := b.t
	p := t.node(parent)
	child := t.newNode(treeNode{
		frame:       f,
		parent:      parent,
		nextSibling: p.firstChild,
		depth:       p.depth + 1,
	})
	p = t.node(parent) // the first chunk may have moved
	p.firstChild = child
	b.children = append(b.children, 0)
	switch n := &b.children[parent]; {
	case *n < listedChildren:
		*n++
	case *n == listedChildren:
		*n++
		for c := p.firstChild; c != 0; c = t.node(c).nextSibling {
			b.index[childKey(parent, t.node(c).frame)] = c
		}
	default:
		*n = listedChildren + 1
		b.index[childKey(parent, f)] = child
	}
	return child
}

// Source returns the source the tree was built from.
func (t *Tree) Source() *traces.Source { return t.src }

// Len returns the number of nodes, the virtual root included.
func (t *Tree) Len() int { return t.n }

// Leaf returns the node where path index i of the source ends: its last
// frame, or the last frame TreeOptions.Keep kept.
func (t *Tree) Leaf(path int) NodeID { return t.leaf[path] }

// Frame returns the frame of node n (0 for the root).
func (t *Tree) Frame(n NodeID) traces.FrameID { return t.node(n).frame }

// Parent returns the parent of n; the root's parent is the root.
func (t *Tree) Parent(n NodeID) NodeID { return t.node(n).parent }

// Depth returns the number of frames on n's path (0 for the root).
func (t *Tree) Depth(n NodeID) int { return int(t.node(n).depth) }

// Path returns the frames from the root's first child down to n.
func (t *Tree) Path(n NodeID) []traces.FrameID {
	out := make([]traces.FrameID, t.node(n).depth)
	for i := len(out) - 1; n != Root; i-- {
		nd := t.node(n)
		out[i] = nd.frame
		n = nd.parent
	}
	return out
}

//! A small HDF5 writer: groups, hard links, attributes, contiguous and
//! chunked datasets, in the file format of HDF5 1.8 and later (superblock
//! version 2, version-2 object headers with compact links, version-3
//! attribute and layout messages, version-1 B-trees for chunk indexes), which
//! HDF5 1.8 and every later reader (h5py, h5dump) opens.
//!
//! Raw data is written in place; metadata is kept in memory and written as a
//! whole by [`Writer::commit`] into space the current superblock does not
//! reference, and the 48-byte superblock is rewritten last to point at it.
//! A reader therefore always sees the file of the last commit, whatever
//! moment the writing process is killed at.

use super::types::{Error, FloatSize, Result, TypeDescriptor};
use std::collections::BTreeMap;
use std::fs::File;
use std::os::unix::fs::FileExt;
use std::path::Path;

const UNDEF: u64 = u64::MAX;
const SIGNATURE: &[u8; 8] = b"\x89HDF\r\n\x1a\n";
const SUPERBLOCK_BYTES: u64 = 48;
/// Entries per chunk B-tree node: 2K with the library's default K = 32
/// (superblock version 2 stores no K, so readers assume the default).
const BTREE_ENTRIES: usize = 64;

/// Index of an object in [`Writer::objects`].
pub(crate) type ObjId = usize;

/// One attribute: name, stored type, shape (empty: scalar) and bytes.
#[derive(Debug, Clone)]
pub(crate) struct Attr {
    pub name: String,
    pub dtype: TypeDescriptor,
    pub dims: Vec<u64>,
    pub data: Vec<u8>,
}

/// Where a dataset's elements are.
#[derive(Debug, Clone)]
pub(crate) enum Layout {
    Contiguous {
        addr: u64,
    },
    /// Chunk grid coordinates → address of the chunk's bytes.
    Chunked {
        chunk: Vec<u64>,
        chunks: BTreeMap<Vec<u64>, u64>,
    },
}

/// A dataset's description.
#[derive(Debug, Clone)]
pub(crate) struct Ds {
    pub dtype: TypeDescriptor,
    pub dims: Vec<u64>,
    /// None: unlimited.
    pub maxdims: Vec<Option<u64>>,
    pub layout: Layout,
}

#[derive(Debug, Clone)]
pub(crate) enum Kind {
    Group { links: Vec<(String, ObjId)> },
    Dataset(Ds),
}

#[derive(Debug, Clone)]
pub(crate) struct Obj {
    pub kind: Kind,
    pub attrs: Vec<Attr>,
}

/// The open file and its metadata.
#[derive(Debug)]
pub(crate) struct Writer {
    file: File,
    pub objects: Vec<Obj>,
    /// End of allocated space.
    eof: u64,
    /// Metadata block the superblock points into.
    current: Option<(u64, u64)>,
    /// Metadata blocks no longer referenced, free for the next commit.
    free: Vec<(u64, u64)>,
    dirty: bool,
}

impl Writer {
    /// Creates (truncating) a file holding an empty root group.
    pub fn create(path: &Path) -> Result<Self> {
        let file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(true)
            .open(path)
            .map_err(|e| Error::from(format!("unable to create file {}: {e}", path.display())))?;
        let mut w = Writer {
            file,
            objects: vec![Obj {
                kind: Kind::Group { links: Vec::new() },
                attrs: Vec::new(),
            }],
            eof: SUPERBLOCK_BYTES,
            current: None,
            free: Vec::new(),
            dirty: true,
        };
        w.commit()?;
        Ok(w)
    }

    /// Opens a file this writer wrote, to change and extend it.
    pub fn open(path: &Path) -> Result<Self> {
        let file = std::fs::OpenOptions::new()
            .read(true)
            .write(true)
            .open(path)
            .map_err(|e| Error::from(format!("unable to open file {}: {e}", path.display())))?;
        let parsed = super::parse::parse(&file).map_err(|e| {
            Error::from(format!(
                "{}: {e} (without the system HDF5 library, only files thicket wrote can be changed)",
                path.display()
            ))
        })?;
        Ok(Writer {
            file,
            objects: parsed.objects,
            eof: parsed.eof,
            current: Some(parsed.meta),
            free: Vec::new(),
            dirty: false,
        })
    }

    pub fn touch(&mut self) {
        self.dirty = true;
    }

    /// Reserves `len` zero bytes at the end of the file.
    pub fn allocate(&mut self, len: u64) -> u64 {
        let addr = self.eof;
        self.eof += len.max(1);
        addr
    }

    pub fn write_at(&self, addr: u64, bytes: &[u8]) -> Result<()> {
        self.file.write_all_at(bytes, addr).map_err(Error::from)
    }

    /// Writes the metadata afresh and repoints the superblock to it.
    pub fn commit(&mut self) -> Result<()> {
        if !self.dirty {
            return Ok(());
        }
        let plan = Plan::new(&self.objects)?;
        let size = plan.size;
        let at = match self.free.iter().position(|&(_, len)| len >= size) {
            Some(i) => self.free.swap_remove(i).0,
            None => self.allocate(size),
        };
        let (bytes, root) = plan.serialize(&self.objects, at)?;
        self.write_at(at, &bytes)?;
        // Readers refuse a file shorter than the end address the superblock states.
        if self.file.metadata()?.len() < self.eof {
            self.file.set_len(self.eof)?;
        }
        self.write_at(0, &superblock(root, self.eof))?;
        if let Some(old) = self.current.replace((at, size)) {
            self.free.push(old);
        }
        self.dirty = false;
        Ok(())
    }

    pub fn group_links(&self, id: ObjId) -> Option<&Vec<(String, ObjId)>> {
        match &self.objects[id].kind {
            Kind::Group { links } => Some(links),
            Kind::Dataset(_) => None,
        }
    }

    /// The object at a '/'-separated path below `from`.
    pub fn resolve(&self, from: ObjId, path: &str) -> Option<ObjId> {
        let mut id = if path.starts_with('/') { 0 } else { from };
        for part in path.split('/').filter(|p| !p.is_empty() && *p != ".") {
            let links = self.group_links(id)?;
            id = links.iter().find(|(n, _)| n == part)?.1;
        }
        Some(id)
    }

    /// Adds `obj` as `name` in group `parent`.
    pub fn add_child(&mut self, parent: ObjId, name: &str, obj: Obj) -> Result<ObjId> {
        if name.is_empty() || name.contains('/') || name.len() > 255 {
            return Err(Error::from(format!("invalid object name {name:?}")));
        }
        let exists = self
            .group_links(parent)
            .ok_or_else(|| Error::from("the parent is not a group"))?
            .iter()
            .any(|(n, _)| n == name);
        if exists {
            return Err(Error::from(format!(
                "unable to create {name}: name already exists"
            )));
        }
        self.objects.push(obj);
        let id = self.objects.len() - 1;
        self.link(parent, name, id)?;
        Ok(id)
    }

    /// Adds a hard link `name` in `parent` to object `target`.
    pub fn link(&mut self, parent: ObjId, name: &str, target: ObjId) -> Result<()> {
        match &mut self.objects[parent].kind {
            Kind::Group { links } => {
                if links.iter().any(|(n, _)| n == name) {
                    return Err(Error::from(format!("link {name} already exists")));
                }
                links.push((name.to_owned(), target));
            }
            Kind::Dataset(_) => return Err(Error::from("the parent is not a group")),
        }
        self.dirty = true;
        Ok(())
    }
}

impl Drop for Writer {
    fn drop(&mut self) {
        let _ = self.commit();
    }
}

fn superblock(root: u64, eof: u64) -> Vec<u8> {
    let mut b = Vec::with_capacity(SUPERBLOCK_BYTES as usize);
    b.extend_from_slice(SIGNATURE);
    b.extend_from_slice(&[2, 8, 8, 0]);
    for v in [0, UNDEF, eof, root] {
        b.extend_from_slice(&v.to_le_bytes());
    }
    let sum = hdf5_reader::checksum::jenkins_lookup3(&b);
    b.extend_from_slice(&sum.to_le_bytes());
    b
}

/// Datatype message body.
pub(crate) fn datatype_bytes(dt: &TypeDescriptor) -> Result<Vec<u8>> {
    let mut b = Vec::new();
    match dt {
        TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) => {
            let signed = matches!(dt, TypeDescriptor::Integer(_));
            let size = dt.size() as u32;
            b.extend_from_slice(&[0x10, if signed { 0x08 } else { 0 }, 0, 0]);
            b.extend_from_slice(&size.to_le_bytes());
            b.extend_from_slice(&0u16.to_le_bytes());
            b.extend_from_slice(&((8 * size) as u16).to_le_bytes());
        }
        TypeDescriptor::Float(size) => {
            // IEEE 754 little-endian with an implied leading mantissa bit.
            let (bytes, sign, exp_loc, exp_size, mant, bias): (u32, u8, u8, u8, u8, u32) =
                match size {
                    FloatSize::U4 => (4, 31, 23, 8, 23, 127),
                    FloatSize::U8 => (8, 63, 52, 11, 52, 1023),
                };
            b.extend_from_slice(&[0x11, 0x20, sign, 0]);
            b.extend_from_slice(&bytes.to_le_bytes());
            b.extend_from_slice(&0u16.to_le_bytes());
            b.extend_from_slice(&((8 * bytes) as u16).to_le_bytes());
            b.extend_from_slice(&[exp_loc, exp_size, 0, mant]);
            b.extend_from_slice(&bias.to_le_bytes());
        }
        TypeDescriptor::FixedAscii(n) | TypeDescriptor::FixedUnicode(n) => {
            // Null-padded, as the HDF5 library stores fixed-length strings by default.
            let charset = if matches!(dt, TypeDescriptor::FixedUnicode(_)) {
                0x10
            } else {
                0
            };
            b.extend_from_slice(&[0x13, 0x01 | charset, 0, 0]);
            b.extend_from_slice(&((*n).max(1) as u32).to_le_bytes());
        }
        other => return Err(Error::from(format!("writing {other} is not supported"))),
    }
    Ok(b)
}

/// Dataspace message body (version 2); `maxdims` None writes none.
fn dataspace_bytes(dims: &[u64], maxdims: Option<&[Option<u64>]>) -> Vec<u8> {
    let mut b = vec![
        2,
        dims.len() as u8,
        u8::from(maxdims.is_some() && !dims.is_empty()),
        0,
    ];
    if !dims.is_empty() {
        b[3] = 1;
    }
    for d in dims {
        b.extend_from_slice(&d.to_le_bytes());
    }
    if let Some(m) = maxdims.filter(|_| !dims.is_empty()) {
        for d in m {
            b.extend_from_slice(&d.unwrap_or(UNDEF).to_le_bytes());
        }
    }
    b
}

fn attribute_bytes(a: &Attr) -> Result<Vec<u8>> {
    let dt = datatype_bytes(&a.dtype)?;
    let ds = dataspace_bytes(&a.dims, None);
    let mut b = vec![3, 0];
    b.extend_from_slice(&((a.name.len() + 1) as u16).to_le_bytes());
    b.extend_from_slice(&(dt.len() as u16).to_le_bytes());
    b.extend_from_slice(&(ds.len() as u16).to_le_bytes());
    b.push(0);
    b.extend_from_slice(a.name.as_bytes());
    b.push(0);
    b.extend_from_slice(&dt);
    b.extend_from_slice(&ds);
    b.extend_from_slice(&a.data);
    Ok(b)
}

/// Bytes of one element of a dataset.
pub(crate) fn element_size(ds: &Ds) -> u64 {
    ds.dtype.size() as u64
}

/// Chunk B-tree key size for a dataset of rank `rank`.
fn key_bytes(rank: usize) -> usize {
    8 + 8 * (rank + 1)
}

fn node_bytes(rank: usize) -> usize {
    24 + BTREE_ENTRIES * 8 + (BTREE_ENTRIES + 1) * key_bytes(rank)
}

/// Number of B-tree nodes for `n` chunks, level by level from the leaves.
fn btree_levels(n: usize) -> Vec<usize> {
    let mut levels = Vec::new();
    if n == 0 {
        return levels;
    }
    let mut width = n.div_ceil(BTREE_ENTRIES);
    levels.push(width);
    while width > 1 {
        width = width.div_ceil(BTREE_ENTRIES);
        levels.push(width);
    }
    levels
}

/// Placement of every reachable object header and chunk index node.
struct Plan {
    order: Vec<ObjId>,
    /// Offset of each object's header from the block start, by ObjId.
    header_at: BTreeMap<ObjId, u64>,
    /// Offset of the first B-tree node of each chunked dataset.
    btree_at: BTreeMap<ObjId, u64>,
    refcount: BTreeMap<ObjId, u32>,
    size: u64,
}

struct Msg {
    kind: u8,
    body: Vec<u8>,
}

fn messages(
    obj: &Obj,
    refcount: u32,
    btree: u64,
    addr_of: &dyn Fn(ObjId) -> u64,
) -> Result<Vec<Msg>> {
    let mut out = Vec::new();
    match &obj.kind {
        Kind::Group { links } => {
            let mut li = vec![0u8, 0];
            li.extend_from_slice(&UNDEF.to_le_bytes());
            li.extend_from_slice(&UNDEF.to_le_bytes());
            out.push(Msg {
                kind: 0x02,
                body: li,
            });
            out.push(Msg {
                kind: 0x0A,
                body: vec![0, 0],
            });
            for (name, target) in links {
                let mut l = vec![1u8, 0];
                l.push(name.len() as u8);
                l.extend_from_slice(name.as_bytes());
                l.extend_from_slice(&addr_of(*target).to_le_bytes());
                out.push(Msg {
                    kind: 0x06,
                    body: l,
                });
            }
        }
        Kind::Dataset(ds) => {
            out.push(Msg {
                kind: 0x01,
                body: dataspace_bytes(&ds.dims, Some(&ds.maxdims)),
            });
            out.push(Msg {
                kind: 0x03,
                body: datatype_bytes(&ds.dtype)?,
            });
            let chunked = matches!(ds.layout, Layout::Chunked { .. });
            // Fill value message v3: allocation incremental (chunked) or early
            // (contiguous), fill written only if set, none set.
            out.push(Msg {
                kind: 0x05,
                body: vec![3, if chunked { 0x0B } else { 0x09 }],
            });
            let mut l = vec![3u8];
            match &ds.layout {
                Layout::Contiguous { addr } => {
                    l.push(1);
                    l.extend_from_slice(&addr.to_le_bytes());
                    let n: u64 = ds.dims.iter().product();
                    l.extend_from_slice(&(n * element_size(ds)).to_le_bytes());
                }
                Layout::Chunked { chunk, .. } => {
                    l.push(2);
                    l.push(chunk.len() as u8 + 1);
                    l.extend_from_slice(&btree.to_le_bytes());
                    for c in chunk {
                        l.extend_from_slice(&(*c as u32).to_le_bytes());
                    }
                    l.extend_from_slice(&(element_size(ds) as u32).to_le_bytes());
                }
            }
            out.push(Msg {
                kind: 0x08,
                body: l,
            });
        }
    }
    if refcount > 1 {
        let mut r = vec![0u8];
        r.extend_from_slice(&refcount.to_le_bytes());
        out.push(Msg {
            kind: 0x16,
            body: r,
        });
    }
    for a in &obj.attrs {
        out.push(Msg {
            kind: 0x0C,
            body: attribute_bytes(a)?,
        });
    }
    for m in &out {
        if m.body.len() > u16::MAX as usize {
            return Err(Error::from(
                "an attribute or message exceeds 64 KiB, the most a header message holds",
            ));
        }
    }
    Ok(out)
}

fn header_bytes(msgs: &[Msg]) -> Vec<u8> {
    let body: usize = msgs.iter().map(|m| 4 + m.body.len()).sum();
    let mut b = Vec::with_capacity(body + 14);
    b.extend_from_slice(b"OHDR");
    // Version 2; flags: chunk-0 size in 4 bytes, no times, no creation order.
    b.extend_from_slice(&[2, 0x02]);
    b.extend_from_slice(&(body as u32).to_le_bytes());
    for m in msgs {
        b.push(m.kind);
        b.extend_from_slice(&(m.body.len() as u16).to_le_bytes());
        b.push(0);
        b.extend_from_slice(&m.body);
    }
    let sum = hdf5_reader::checksum::jenkins_lookup3(&b);
    b.extend_from_slice(&sum.to_le_bytes());
    b
}

impl Plan {
    fn new(objects: &[Obj]) -> Result<Self> {
        // Depth-first from the root: every reachable object once, counting links.
        let mut order = Vec::new();
        let mut refcount: BTreeMap<ObjId, u32> = BTreeMap::new();
        let mut stack = vec![0];
        refcount.insert(0, 1);
        while let Some(id) = stack.pop() {
            order.push(id);
            if let Kind::Group { links } = &objects[id].kind {
                for (_, t) in links.iter().rev() {
                    let c = refcount.entry(*t).or_insert(0);
                    *c += 1;
                    if *c == 1 {
                        stack.push(*t);
                    }
                }
            }
        }
        let mut header_at = BTreeMap::new();
        let mut at = 0u64;
        for &id in &order {
            let msgs = messages(&objects[id], refcount[&id], 0, &|_| 0)?;
            header_at.insert(id, at);
            at += header_bytes(&msgs).len() as u64;
        }
        let mut btree_at = BTreeMap::new();
        for &id in &order {
            if let Kind::Dataset(Ds {
                layout: Layout::Chunked { chunk, chunks },
                ..
            }) = &objects[id].kind
            {
                let nodes: usize = btree_levels(chunks.len()).iter().sum();
                if nodes > 0 {
                    btree_at.insert(id, at);
                    at += (nodes * node_bytes(chunk.len())) as u64;
                }
            }
        }
        Ok(Plan {
            order,
            header_at,
            btree_at,
            refcount,
            size: at,
        })
    }

    /// The metadata block placed at `base`, and the root header's address.
    fn serialize(&self, objects: &[Obj], base: u64) -> Result<(Vec<u8>, u64)> {
        let mut out = vec![0u8; self.size as usize];
        let addr_of = |id: ObjId| base + self.header_at[&id];
        let mut roots = BTreeMap::new();
        for (&id, &off) in &self.btree_at {
            if let Kind::Dataset(ds) = &objects[id].kind {
                let (bytes, root_off) = btree_bytes(ds, base + off);
                out[off as usize..off as usize + bytes.len()].copy_from_slice(&bytes);
                roots.insert(id, root_off);
            }
        }
        for &id in &self.order {
            let btree = roots.get(&id).copied().unwrap_or(UNDEF);
            let msgs = messages(&objects[id], self.refcount[&id], btree, &addr_of)?;
            let h = header_bytes(&msgs);
            let off = self.header_at[&id] as usize;
            out[off..off + h.len()].copy_from_slice(&h);
        }
        Ok((out, addr_of(0)))
    }
}

/// All nodes of a dataset's chunk B-tree, placed from `at`, and the root's address.
fn btree_bytes(ds: &Ds, at: u64) -> (Vec<u8>, u64) {
    let Layout::Chunked { chunk, chunks } = &ds.layout else {
        unreachable!("only chunked datasets have a B-tree")
    };
    let rank = chunk.len();
    let chunk_bytes: u64 = chunk.iter().product::<u64>() * element_size(ds);
    let key = |coords: &[u64]| -> Vec<u8> {
        let mut k = Vec::with_capacity(key_bytes(rank));
        k.extend_from_slice(&(chunk_bytes as u32).to_le_bytes());
        k.extend_from_slice(&0u32.to_le_bytes());
        for (c, d) in coords.iter().zip(chunk) {
            k.extend_from_slice(&(c * d).to_le_bytes());
        }
        k.extend_from_slice(&0u64.to_le_bytes());
        k
    };
    // The key after the last chunk: one chunk further along the first axis.
    let past = |coords: &[u64]| -> Vec<u64> {
        let mut c = coords.to_vec();
        c[0] += 1;
        c
    };
    let size = node_bytes(rank);
    let mut out = Vec::new();
    // Entries of the level being built: (first coords, last-past coords, child address).
    let mut level: Vec<(Vec<u64>, Vec<u64>, u64)> = chunks
        .iter()
        .map(|(c, &a)| (c.clone(), past(c), a))
        .collect();
    let mut height = 0u8;
    loop {
        let groups: Vec<_> = level.chunks(BTREE_ENTRIES).map(|g| g.to_vec()).collect();
        let count = groups.len();
        let first_addr = at + out.len() as u64;
        let mut next = Vec::with_capacity(count);
        for (i, g) in groups.iter().enumerate() {
            let addr = first_addr + (i * size) as u64;
            let left = if i == 0 { UNDEF } else { addr - size as u64 };
            let right = if i + 1 == count {
                UNDEF
            } else {
                addr + size as u64
            };
            let mut n = Vec::with_capacity(size);
            n.extend_from_slice(b"TREE");
            n.extend_from_slice(&[1, height]);
            n.extend_from_slice(&(g.len() as u16).to_le_bytes());
            n.extend_from_slice(&left.to_le_bytes());
            n.extend_from_slice(&right.to_le_bytes());
            for (first, _, child) in g {
                n.extend_from_slice(&key(first));
                n.extend_from_slice(&child.to_le_bytes());
            }
            n.extend_from_slice(&key(&g[g.len() - 1].1));
            n.resize(size, 0);
            out.extend_from_slice(&n);
            next.push((g[0].0.clone(), g[g.len() - 1].1.clone(), addr));
        }
        if count == 1 {
            return (out, first_addr);
        }
        level = next;
        height += 1;
    }
}

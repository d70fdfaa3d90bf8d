//! Reads back the metadata of a file [`super::writer`] wrote, to reopen it
//! for writing (a resumed run). Anything outside that layout is refused.

use super::types::{Error, FloatSize, IntSize, Result, TypeDescriptor};
use super::writer::{Attr, Ds, Kind, Layout, Obj, ObjId};
use std::collections::BTreeMap;
use std::fs::File;
use std::os::unix::fs::FileExt;

const UNDEF: u64 = u64::MAX;

pub(crate) struct Parsed {
    pub objects: Vec<Obj>,
    pub eof: u64,
    /// The metadata block the superblock points into.
    pub meta: (u64, u64),
}

struct Cursor<'a> {
    b: &'a [u8],
    at: usize,
}

impl<'a> Cursor<'a> {
    fn take(&mut self, n: usize) -> Result<&'a [u8]> {
        let s = self
            .b
            .get(self.at..self.at + n)
            .ok_or_else(|| Error::from("truncated metadata"))?;
        self.at += n;
        Ok(s)
    }
    fn u8(&mut self) -> Result<u8> {
        Ok(self.take(1)?[0])
    }
    fn u16(&mut self) -> Result<u16> {
        Ok(u16::from_le_bytes(self.take(2)?.try_into().expect("2")))
    }
    fn u32(&mut self) -> Result<u32> {
        Ok(u32::from_le_bytes(self.take(4)?.try_into().expect("4")))
    }
    fn u64(&mut self) -> Result<u64> {
        Ok(u64::from_le_bytes(self.take(8)?.try_into().expect("8")))
    }
}

fn read(file: &File, addr: u64, len: usize) -> Result<Vec<u8>> {
    let mut b = vec![0u8; len];
    file.read_exact_at(&mut b, addr)?;
    Ok(b)
}

struct State<'f> {
    file: &'f File,
    objects: Vec<Obj>,
    by_addr: BTreeMap<u64, ObjId>,
    lo: u64,
    hi: u64,
}

pub(crate) fn parse(file: &File) -> Result<Parsed> {
    let sb = read(file, 0, 48)?;
    if &sb[..8] != b"\x89HDF\r\n\x1a\n" || sb[8] != 2 || sb[9] != 8 || sb[10] != 8 {
        return Err(Error::from("not a file of this writer (superblock)"));
    }
    let mut c = Cursor { b: &sb, at: 12 };
    let _base = c.u64()?;
    let _ext = c.u64()?;
    let eof = c.u64()?;
    let root = c.u64()?;
    let mut st = State {
        file,
        objects: Vec::new(),
        by_addr: BTreeMap::new(),
        lo: u64::MAX,
        hi: 0,
    };
    st.object(root)?;
    let meta = (st.lo, st.hi - st.lo);
    Ok(Parsed {
        objects: st.objects,
        eof: eof.max(file.metadata()?.len()),
        meta,
    })
}

impl State<'_> {
    fn span(&mut self, addr: u64, len: u64) {
        self.lo = self.lo.min(addr);
        self.hi = self.hi.max(addr + len);
    }

    fn object(&mut self, addr: u64) -> Result<ObjId> {
        if let Some(&id) = self.by_addr.get(&addr) {
            return Ok(id);
        }
        let head = read(self.file, addr, 10)?;
        if &head[..4] != b"OHDR" || head[4] != 2 || head[5] != 0x02 {
            return Err(Error::from("not a file of this writer (object header)"));
        }
        let body = u32::from_le_bytes(head[6..10].try_into().expect("4")) as usize;
        let bytes = read(self.file, addr + 10, body)?;
        self.span(addr, 10 + body as u64 + 4);
        let id = self.objects.len();
        self.by_addr.insert(addr, id);
        self.objects.push(Obj {
            kind: Kind::Group { links: Vec::new() },
            attrs: Vec::new(),
        });
        let mut c = Cursor { b: &bytes, at: 0 };
        let mut links = Vec::new();
        let (mut dims, mut maxdims, mut dtype, mut layout) = (None, None, None, None);
        let mut attrs = Vec::new();
        while c.at + 4 <= bytes.len() {
            let kind = c.u8()?;
            let size = c.u16()? as usize;
            let _flags = c.u8()?;
            let m = c.take(size)?;
            let mut mc = Cursor { b: m, at: 0 };
            match kind {
                0x06 => {
                    let _v = mc.u8()?;
                    let flags = mc.u8()?;
                    if flags != 0 {
                        return Err(Error::from("unsupported link"));
                    }
                    let n = mc.u8()? as usize;
                    let name = String::from_utf8_lossy(mc.take(n)?).into_owned();
                    links.push((name, mc.u64()?));
                }
                0x01 => {
                    let (d, md) = dataspace(&mut mc)?;
                    dims = Some(d);
                    maxdims = Some(md);
                }
                0x03 => dtype = Some(datatype(&mut mc)?),
                0x08 => layout = Some(m.to_vec()),
                0x0C => attrs.push(attribute(m)?),
                _ => {}
            }
        }
        let kind = match (dims, dtype, layout) {
            (Some(dims), Some(dtype), Some(l)) => {
                let mut lc = Cursor { b: &l, at: 0 };
                if lc.u8()? != 3 {
                    return Err(Error::from("unsupported layout version"));
                }
                let layout = match lc.u8()? {
                    1 => Layout::Contiguous { addr: lc.u64()? },
                    2 => {
                        let nd = lc.u8()? as usize;
                        let btree = lc.u64()?;
                        let mut chunk = Vec::new();
                        for _ in 0..nd - 1 {
                            chunk.push(lc.u32()? as u64);
                        }
                        let mut chunks = BTreeMap::new();
                        if btree != UNDEF {
                            self.btree(btree, &chunk, &mut chunks)?;
                        }
                        Layout::Chunked { chunk, chunks }
                    }
                    _ => return Err(Error::from("unsupported layout")),
                };
                Kind::Dataset(Ds {
                    dtype,
                    dims,
                    maxdims: maxdims.unwrap_or_default(),
                    layout,
                })
            }
            _ => {
                let mut resolved = Vec::new();
                for (name, a) in links {
                    resolved.push((name, self.object(a)?));
                }
                Kind::Group { links: resolved }
            }
        };
        self.objects[id] = Obj { kind, attrs };
        Ok(id)
    }

    fn btree(&mut self, addr: u64, chunk: &[u64], out: &mut BTreeMap<Vec<u64>, u64>) -> Result<()> {
        let rank = chunk.len();
        let key = 8 + 8 * (rank + 1);
        let size = 24 + 64 * 8 + 65 * key;
        let b = read(self.file, addr, size)?;
        self.span(addr, size as u64);
        if &b[..4] != b"TREE" || b[4] != 1 {
            return Err(Error::from("not a chunk B-tree node"));
        }
        let level = b[5];
        let used = u16::from_le_bytes([b[6], b[7]]) as usize;
        let mut c = Cursor { b: &b, at: 24 };
        for _ in 0..used {
            let k = c.take(key)?;
            let child = c.u64()?;
            if level == 0 {
                let coords = (0..rank)
                    .map(|d| {
                        let off =
                            u64::from_le_bytes(k[8 + 8 * d..16 + 8 * d].try_into().expect("8"));
                        off / chunk[d].max(1)
                    })
                    .collect();
                out.insert(coords, child);
            } else {
                self.btree(child, chunk, out)?;
            }
        }
        Ok(())
    }
}

fn dataspace(c: &mut Cursor<'_>) -> Result<(Vec<u64>, Vec<Option<u64>>)> {
    let _v = c.u8()?;
    let rank = c.u8()? as usize;
    let flags = c.u8()?;
    let _ty = c.u8()?;
    let dims: Vec<u64> = (0..rank).map(|_| c.u64()).collect::<Result<_>>()?;
    let maxdims = if flags & 1 != 0 {
        (0..rank)
            .map(|_| c.u64().map(|m| (m != UNDEF).then_some(m)))
            .collect::<Result<_>>()?
    } else {
        dims.iter().map(|&d| Some(d)).collect()
    };
    Ok((dims, maxdims))
}

fn datatype(c: &mut Cursor<'_>) -> Result<TypeDescriptor> {
    let cv = c.u8()?;
    let b0 = c.u8()?;
    let _b1 = c.u8()?;
    let _b2 = c.u8()?;
    let size = c.u32()? as usize;
    let int = |n| match n {
        1 => Ok(IntSize::U1),
        2 => Ok(IntSize::U2),
        4 => Ok(IntSize::U4),
        8 => Ok(IntSize::U8),
        _ => Err(Error::from("unsupported integer size")),
    };
    Ok(match cv & 0x0f {
        0 if b0 & 0x08 != 0 => TypeDescriptor::Integer(int(size)?),
        0 => TypeDescriptor::Unsigned(int(size)?),
        1 if size == 4 => TypeDescriptor::Float(FloatSize::U4),
        1 => TypeDescriptor::Float(FloatSize::U8),
        3 if b0 & 0xf0 != 0 => TypeDescriptor::FixedUnicode(size),
        3 => TypeDescriptor::FixedAscii(size),
        _ => return Err(Error::from("unsupported datatype")),
    })
}

fn attribute(m: &[u8]) -> Result<Attr> {
    let mut c = Cursor { b: m, at: 0 };
    if c.u8()? != 3 {
        return Err(Error::from("unsupported attribute version"));
    }
    let _flags = c.u8()?;
    let nlen = c.u16()? as usize;
    let dlen = c.u16()? as usize;
    let slen = c.u16()? as usize;
    let _enc = c.u8()?;
    let name = String::from_utf8_lossy(&c.take(nlen)?[..nlen.saturating_sub(1)]).into_owned();
    let dtype = datatype(&mut Cursor {
        b: c.take(dlen)?,
        at: 0,
    })?;
    let (dims, _) = dataspace(&mut Cursor {
        b: c.take(slen)?,
        at: 0,
    })?;
    let data = m[c.at..].to_vec();
    Ok(Attr {
        name,
        dtype,
        dims,
        data,
    })
}

//! The pure-Rust path: the names and calls of `hdf5-metno` that thicket
//! uses, over our writer ([`writer`]) and the `hdf5-reader` crate.
//!
//! A file is open either for writing (`create`, `open_rw`: objects live in
//! the writer's memory, raw data goes straight to the file) or for reading
//! (`open`: every object is looked up through `hdf5-reader`).

mod parse;
pub mod types;
mod writer;

pub use types::{Error, H5Type, Result};

use ndarray::{ArrayD, ArrayView, Dimension, IxDyn, SliceInfoElem};
use std::ops::{Deref, RangeFrom};
use std::path::Path;
use std::sync::{Arc, Mutex, MutexGuard};
use types::TypeDescriptor;
use writer::{Attr, Ds, Kind, Layout, Obj, ObjId, Writer};

#[derive(Clone)]
enum Backing {
    Write(Arc<Mutex<Writer>>),
    Read(Arc<hdf5_reader::Hdf5File>),
}

impl std::fmt::Debug for Backing {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Backing::Write(_) => f.write_str("Write"),
            Backing::Read(_) => f.write_str("Read"),
        }
    }
}

fn lock(w: &Arc<Mutex<Writer>>) -> MutexGuard<'_, Writer> {
    w.lock().unwrap_or_else(|e| e.into_inner())
}

fn join(base: &str, name: &str) -> String {
    if name.starts_with('/') {
        name.to_owned()
    } else if base == "/" {
        format!("/{name}")
    } else {
        format!("{base}/{name}")
    }
}

/// Current and maximum extent per axis (None: unlimited).
#[derive(Debug, Clone)]
pub struct Extents(Vec<(u64, Option<u64>)>);

impl From<()> for Extents {
    fn from(_: ()) -> Self {
        Extents(Vec::new())
    }
}

/// One axis of an extent: a fixed size or an unlimited one starting at a size.
pub trait Extent {
    /// (current, maximum).
    fn extent(self) -> (u64, Option<u64>);
}

impl Extent for usize {
    fn extent(self) -> (u64, Option<u64>) {
        (self as u64, Some(self as u64))
    }
}

impl Extent for RangeFrom<usize> {
    fn extent(self) -> (u64, Option<u64>) {
        (self.start as u64, None)
    }
}

impl<A: Extent> From<A> for Extents {
    fn from(a: A) -> Self {
        Extents(vec![a.extent()])
    }
}

impl<A: Extent, B: Extent> From<(A, B)> for Extents {
    fn from((a, b): (A, B)) -> Self {
        Extents(vec![a.extent(), b.extent()])
    }
}

impl<A: Extent, B: Extent, C: Extent> From<(A, B, C)> for Extents {
    fn from((a, b, c): (A, B, C)) -> Self {
        Extents(vec![a.extent(), b.extent(), c.extent()])
    }
}

impl From<Vec<usize>> for Extents {
    fn from(v: Vec<usize>) -> Self {
        Extents(v.into_iter().map(Extent::extent).collect())
    }
}

impl From<&[usize]> for Extents {
    fn from(v: &[usize]) -> Self {
        Extents(v.iter().map(|&d| d.extent()).collect())
    }
}

/// A fixed size per axis (chunk shapes, new extents).
#[derive(Debug, Clone)]
pub struct Dims(Vec<u64>);

impl From<usize> for Dims {
    fn from(a: usize) -> Self {
        Dims(vec![a as u64])
    }
}

impl From<(usize, usize)> for Dims {
    fn from((a, b): (usize, usize)) -> Self {
        Dims(vec![a as u64, b as u64])
    }
}

impl From<(usize, usize, usize)> for Dims {
    fn from((a, b, c): (usize, usize, usize)) -> Self {
        Dims(vec![a as u64, b as u64, c as u64])
    }
}

impl From<Vec<usize>> for Dims {
    fn from(v: Vec<usize>) -> Self {
        Dims(v.into_iter().map(|d| d as u64).collect())
    }
}

impl From<&[usize]> for Dims {
    fn from(v: &[usize]) -> Self {
        Dims(v.iter().map(|&d| d as u64).collect())
    }
}

/// A stored element type.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Datatype(TypeDescriptor);

impl Datatype {
    /// Bytes per element.
    pub fn size(&self) -> usize {
        self.0.size()
    }

    /// Whether elements are stored exactly as `T`.
    pub fn is<T: H5Type>(&self) -> bool {
        self.0 == T::type_descriptor()
    }

    /// The description of the stored type.
    ///
    /// # Errors
    /// None on this path; the signature matches the C-library path.
    pub fn to_descriptor(&self) -> Result<TypeDescriptor> {
        Ok(self.0.clone())
    }

    /// The stored type for a description.
    ///
    /// # Errors
    /// None on this path; the signature matches the C-library path.
    pub fn from_descriptor(desc: &TypeDescriptor) -> Result<Self> {
        Ok(Datatype(desc.clone()))
    }
}

/// Options when creating a file (kept for the C-library path's calls).
#[derive(Debug, Default)]
pub struct FileAccess;

impl FileAccess {
    /// The pure-Rust writer always writes the HDF5 1.8+ format.
    pub fn libver_v110(&mut self) -> &mut Self {
        self
    }
}

/// Builds a file with options.
#[derive(Debug, Default)]
pub struct FileBuilder {
    fapl: FileAccess,
}

impl FileBuilder {
    /// Sets file access options.
    pub fn with_fapl<F: FnOnce(&mut FileAccess) -> &mut FileAccess>(mut self, f: F) -> Self {
        f(&mut self.fapl);
        self
    }

    /// Creates (truncates) the file.
    ///
    /// # Errors
    /// I/O failures.
    pub fn create<P: AsRef<Path>>(self, path: P) -> Result<File> {
        File::create(path)
    }
}

/// An open HDF5 file; derefs to its root group.
#[derive(Debug, Clone)]
pub struct File {
    root: Group,
}

impl File {
    /// Creates (truncates) a file for writing.
    ///
    /// # Errors
    /// I/O failures.
    pub fn create<P: AsRef<Path>>(path: P) -> Result<Self> {
        let w = Writer::create(path.as_ref())?;
        Ok(Self::writer(w))
    }

    /// Opens a file thicket wrote, for changing it.
    ///
    /// # Errors
    /// I/O failures, or a file of another layout.
    pub fn open_rw<P: AsRef<Path>>(path: P) -> Result<Self> {
        let w = Writer::open(path.as_ref())?;
        Ok(Self::writer(w))
    }

    /// Opens any HDF5 file for reading.
    ///
    /// # Errors
    /// Missing files and files that are not HDF5.
    pub fn open<P: AsRef<Path>>(path: P) -> Result<Self> {
        let p = path.as_ref();
        // A small chunk cache, as the C library keeps (1 MiB per dataset): our
        // readers go through a file once, window by window.
        let options = hdf5_reader::OpenOptions::default().with_chunk_cache_bytes(8 << 20);
        let r = hdf5_reader::Hdf5File::open_with_options(p, options)
            .map_err(|e| Error::from(format!("unable to open file {}: {e}", p.display())))?;
        Ok(File {
            root: Group(Location {
                back: Backing::Read(Arc::new(r)),
                path: "/".into(),
                id: 0,
            }),
        })
    }

    /// Options for creating a file.
    pub fn with_options() -> FileBuilder {
        FileBuilder::default()
    }

    fn writer(w: Writer) -> Self {
        File {
            root: Group(Location {
                back: Backing::Write(Arc::new(Mutex::new(w))),
                path: "/".into(),
                id: 0,
            }),
        }
    }

    /// Makes everything written so far what a reader of the file sees.
    ///
    /// # Errors
    /// I/O failures.
    pub fn flush(&self) -> Result<()> {
        match &self.root.0.back {
            Backing::Write(w) => lock(w).commit(),
            Backing::Read(_) => Ok(()),
        }
    }
}

impl Deref for File {
    type Target = Group;
    fn deref(&self) -> &Group {
        &self.root
    }
}

/// A named object in a file (group or dataset): its attributes.
#[derive(Debug, Clone)]
pub struct Location {
    back: Backing,
    path: String,
    /// Object id in write mode.
    id: ObjId,
}

/// A group.
#[derive(Debug, Clone)]
pub struct Group(Location);

impl Deref for Group {
    type Target = Location;
    fn deref(&self) -> &Location {
        &self.0
    }
}

/// A dataset.
#[derive(Debug, Clone)]
pub struct Dataset(Location);

impl Deref for Dataset {
    type Target = Location;
    fn deref(&self) -> &Location {
        &self.0
    }
}

/// An attribute of a group or dataset.
#[derive(Debug, Clone)]
pub struct Attribute {
    owner: Location,
    name: String,
    /// The attribute as read (read mode).
    read: Option<hdf5_reader::Attribute>,
}

fn read_only() -> Error {
    Error::from("the file is open for reading only")
}

fn write_only() -> Error {
    Error::from("reading data from a file open for writing is not supported; open it for reading")
}

impl Location {
    /// Absolute path of the object.
    pub fn name(&self) -> String {
        self.path.clone()
    }

    fn child(&self, path: &str, id: ObjId) -> Location {
        Location {
            back: self.back.clone(),
            path: join(&self.path, path),
            id,
        }
    }

    fn reader_attrs(&self, r: &hdf5_reader::Hdf5File) -> Result<Vec<hdf5_reader::Attribute>> {
        if self.path == "/" {
            return Ok(r.root_group()?.attributes()?);
        }
        match r.group(&self.path) {
            Ok(g) => Ok(g.attributes()?),
            Err(_) => Ok(r.dataset(&self.path)?.attributes()),
        }
    }

    /// Names of the attributes.
    ///
    /// # Errors
    /// Unreadable objects.
    pub fn attr_names(&self) -> Result<Vec<String>> {
        match &self.back {
            Backing::Write(w) => Ok(lock(w).objects[self.id]
                .attrs
                .iter()
                .map(|a| a.name.clone())
                .collect()),
            Backing::Read(r) => Ok(self.reader_attrs(r)?.into_iter().map(|a| a.name).collect()),
        }
    }

    /// The attribute `name`.
    ///
    /// # Errors
    /// A missing attribute.
    pub fn attr(&self, name: &str) -> Result<Attribute> {
        let missing = || Error::from(format!("attribute {name} of {} does not exist", self.path));
        match &self.back {
            Backing::Write(w) => {
                if lock(w).objects[self.id]
                    .attrs
                    .iter()
                    .any(|a| a.name == name)
                {
                    Ok(Attribute {
                        owner: self.clone(),
                        name: name.to_owned(),
                        read: None,
                    })
                } else {
                    Err(missing())
                }
            }
            Backing::Read(r) => {
                let a = self
                    .reader_attrs(r)?
                    .into_iter()
                    .find(|a| a.name == name)
                    .ok_or_else(missing)?;
                Ok(Attribute {
                    owner: self.clone(),
                    name: name.to_owned(),
                    read: Some(a),
                })
            }
        }
    }

    /// Removes the attribute `name`.
    ///
    /// # Errors
    /// A missing attribute or a file open for reading.
    pub fn delete_attr(&self, name: &str) -> Result<()> {
        let Backing::Write(w) = &self.back else {
            return Err(read_only());
        };
        let mut w = lock(w);
        let attrs = &mut w.objects[self.id].attrs;
        let before = attrs.len();
        attrs.retain(|a| a.name != name);
        if attrs.len() == before {
            return Err(Error::from(format!("attribute {name} does not exist")));
        }
        w.touch();
        Ok(())
    }

    /// Starts an attribute of element type `T`.
    pub fn new_attr<T: H5Type>(&self) -> AttributeBuilder {
        AttributeBuilder {
            owner: self.clone(),
            dtype: T::type_descriptor(),
            shape: Vec::new(),
        }
    }

    /// Starts an attribute whose type is given later.
    pub fn new_attr_builder(&self) -> AttributeBuilderUntyped {
        AttributeBuilderUntyped {
            owner: self.clone(),
        }
    }

    fn add_attr(&self, name: &str, dtype: TypeDescriptor, shape: Vec<u64>) -> Result<Attribute> {
        let Backing::Write(w) = &self.back else {
            return Err(read_only());
        };
        let mut w = lock(w);
        let attrs = &mut w.objects[self.id].attrs;
        if attrs.iter().any(|a| a.name == name) {
            return Err(Error::from(format!(
                "unable to create attribute {name}: it already exists"
            )));
        }
        let n: u64 = shape.iter().product();
        attrs.push(Attr {
            name: name.to_owned(),
            data: vec![0; (n as usize) * dtype.size()],
            dtype,
            dims: shape,
        });
        w.touch();
        Ok(Attribute {
            owner: self.clone(),
            name: name.to_owned(),
            read: None,
        })
    }
}

/// Creates an attribute of a known element type.
#[derive(Debug)]
pub struct AttributeBuilder {
    owner: Location,
    dtype: TypeDescriptor,
    shape: Vec<u64>,
}

impl AttributeBuilder {
    /// Sets the shape (default: scalar).
    pub fn shape<E: Into<Extents>>(mut self, e: E) -> Self {
        self.shape = e.into().0.into_iter().map(|(d, _)| d).collect();
        self
    }

    /// Creates the attribute, zero-filled.
    ///
    /// # Errors
    /// An existing attribute of that name or a file open for reading.
    pub fn create(self, name: &str) -> Result<Attribute> {
        self.owner.add_attr(name, self.dtype, self.shape)
    }
}

/// Creates an attribute of a type given as a [`Datatype`].
#[derive(Debug)]
pub struct AttributeBuilderUntyped {
    owner: Location,
}

impl AttributeBuilderUntyped {
    /// Uses the stored type `dtype`.
    pub fn empty_as(self, dtype: &Datatype) -> AttributeBuilder {
        AttributeBuilder {
            owner: self.owner,
            dtype: dtype.0.clone(),
            shape: Vec::new(),
        }
    }
}

impl Attribute {
    /// Name of the attribute.
    pub fn name(&self) -> String {
        self.name.clone()
    }

    fn with_attr<R>(&self, f: impl FnOnce(&Attr) -> Result<R>) -> Result<R> {
        let Backing::Write(w) = &self.owner.back else {
            return Err(read_only());
        };
        let w = lock(w);
        let a = w.objects[self.owner.id]
            .attrs
            .iter()
            .find(|a| a.name == self.name)
            .ok_or_else(|| Error::from(format!("attribute {} does not exist", self.name)))?;
        f(a)
    }

    /// The stored element type.
    ///
    /// # Errors
    /// A removed attribute.
    pub fn dtype(&self) -> Result<Datatype> {
        match &self.read {
            Some(a) => Ok(Datatype(TypeDescriptor::from_reader(&a.datatype))),
            None => self.with_attr(|a| Ok(Datatype(a.dtype.clone()))),
        }
    }

    /// The shape (empty: scalar).
    pub fn shape(&self) -> Vec<usize> {
        match &self.read {
            Some(a) => a.shape.iter().map(|&d| d as usize).collect(),
            None => self
                .with_attr(|a| Ok(a.dims.iter().map(|&d| d as usize).collect()))
                .unwrap_or_default(),
        }
    }

    /// Number of elements.
    pub fn size(&self) -> usize {
        self.shape().iter().product()
    }

    /// Whether the attribute is a scalar.
    pub fn is_scalar(&self) -> bool {
        self.shape().is_empty()
    }

    /// Every element, converted to `T`.
    ///
    /// # Errors
    /// Types that do not convert (a string as a number, ...).
    pub fn read_raw<T: H5Type>(&self) -> Result<Vec<T>> {
        match &self.read {
            Some(a) => {
                let desc = TypeDescriptor::from_reader(&a.datatype);
                match desc {
                    TypeDescriptor::FixedAscii(_)
                    | TypeDescriptor::FixedUnicode(_)
                    | TypeDescriptor::VarLenAscii
                    | TypeDescriptor::VarLenUnicode => a
                        .read_strings()?
                        .iter()
                        .map(|s| {
                            T::from_text(s).ok_or_else(|| {
                                Error::from(format!(
                                    "cannot convert {desc} to {}",
                                    T::type_descriptor()
                                ))
                            })
                        })
                        .collect(),
                    _ => types::decode(&a.raw_data, &desc),
                }
            }
            None => self.with_attr(|a| types::decode(&a.data, &a.dtype)),
        }
    }

    /// The single element of a scalar attribute.
    ///
    /// # Errors
    /// Types that do not convert; an attribute with no element.
    pub fn read_scalar<T: H5Type>(&self) -> Result<T> {
        self.read_raw::<T>()?
            .into_iter()
            .next()
            .ok_or_else(|| Error::from(format!("attribute {} is empty", self.name)))
    }

    /// Every element as a 1-D array.
    ///
    /// # Errors
    /// As [`Attribute::read_raw`].
    pub fn read_1d<T: H5Type>(&self) -> Result<ndarray::Array1<T>> {
        Ok(ndarray::Array1::from(self.read_raw::<T>()?))
    }

    fn store(&self, bytes: Vec<u8>, count: usize) -> Result<()> {
        let Backing::Write(w) = &self.owner.back else {
            return Err(read_only());
        };
        let mut w = lock(w);
        let a = w.objects[self.owner.id]
            .attrs
            .iter_mut()
            .find(|a| a.name == self.name)
            .ok_or_else(|| Error::from(format!("attribute {} does not exist", self.name)))?;
        let want: u64 = a.dims.iter().product();
        if want as usize != count {
            return Err(Error::from(format!(
                "attribute {} holds {want} element(s), not {count}",
                self.name
            )));
        }
        a.data = bytes;
        w.touch();
        Ok(())
    }

    /// Writes the single element of a scalar attribute.
    ///
    /// # Errors
    /// Types that do not convert; a file open for reading.
    pub fn write_scalar<T: H5Type>(&self, v: &T) -> Result<()> {
        let dtype = self.dtype()?;
        self.store(types::encode(std::slice::from_ref(v), &dtype.0)?, 1)
    }

    /// Writes every element.
    ///
    /// # Errors
    /// A wrong element count; types that do not convert.
    pub fn write<'a, A, T, D>(&self, arr: A) -> Result<()>
    where
        A: Into<ArrayView<'a, T, D>>,
        T: H5Type,
        D: Dimension,
    {
        let view = arr.into();
        let values: Vec<T> = view.iter().cloned().collect();
        let dtype = self.dtype()?;
        self.store(types::encode(&values, &dtype.0)?, values.len())
    }

    /// Writes every element from a slice.
    ///
    /// # Errors
    /// As [`Attribute::write`].
    pub fn write_raw<T: H5Type>(&self, values: &[T]) -> Result<()> {
        let dtype = self.dtype()?;
        self.store(types::encode(values, &dtype.0)?, values.len())
    }
}

impl Group {
    fn writer(&self) -> Result<&Arc<Mutex<Writer>>> {
        match &self.0.back {
            Backing::Write(w) => Ok(w),
            Backing::Read(_) => Err(read_only()),
        }
    }

    /// Creates the group `name` in this group.
    ///
    /// # Errors
    /// An existing name or a file open for reading.
    pub fn create_group(&self, name: &str) -> Result<Group> {
        let w = self.writer()?;
        let id = lock(w).add_child(
            self.0.id,
            name,
            Obj {
                kind: Kind::Group { links: Vec::new() },
                attrs: Vec::new(),
            },
        )?;
        Ok(Group(self.0.child(name, id)))
    }

    fn resolve(&self, path: &str, want_group: bool) -> Result<Location> {
        let what = if want_group { "group" } else { "dataset" };
        let missing = || {
            Error::from(format!(
                "unable to open {what} {}: object does not exist",
                join(&self.0.path, path)
            ))
        };
        match &self.0.back {
            Backing::Write(w) => {
                let w = lock(w);
                let id = w.resolve(self.0.id, path).ok_or_else(missing)?;
                let is_group = matches!(w.objects[id].kind, Kind::Group { .. });
                if is_group != want_group {
                    return Err(Error::from(format!(
                        "{} is not a {what}",
                        join(&self.0.path, path)
                    )));
                }
                Ok(self.0.child(path, id))
            }
            Backing::Read(r) => {
                let full = join(&self.0.path, path);
                let found = if want_group {
                    full == "/" || r.group(&full).is_ok()
                } else {
                    r.dataset(&full).is_ok()
                };
                if !found {
                    return Err(missing());
                }
                Ok(self.0.child(path, 0))
            }
        }
    }

    /// The group at `path` (relative to this group, or absolute).
    ///
    /// # Errors
    /// A missing group.
    pub fn group(&self, path: &str) -> Result<Group> {
        self.resolve(path, true).map(Group)
    }

    /// The dataset at `path` (relative to this group, or absolute).
    ///
    /// # Errors
    /// A missing dataset.
    pub fn dataset(&self, path: &str) -> Result<Dataset> {
        self.resolve(path, false).map(Dataset)
    }

    /// Whether `path` (relative to this group, or absolute) names an object.
    pub fn link_exists(&self, path: &str) -> bool {
        match &self.0.back {
            Backing::Write(w) => lock(w).resolve(self.0.id, path).is_some(),
            Backing::Read(r) => {
                let full = join(&self.0.path, path);
                full == "/" || r.group(&full).is_ok() || r.dataset(&full).is_ok()
            }
        }
    }

    /// Names of the members (groups and datasets), sorted.
    ///
    /// # Errors
    /// An unreadable group.
    pub fn member_names(&self) -> Result<Vec<String>> {
        let mut names = match &self.0.back {
            Backing::Write(w) => lock(w)
                .group_links(self.0.id)
                .map(|l| l.iter().map(|(n, _)| n.clone()).collect())
                .unwrap_or_default(),
            Backing::Read(r) => {
                let g = if self.0.path == "/" {
                    r.root_group()?
                } else {
                    r.group(&self.0.path)?
                };
                let (mut a, b) = g.member_names()?;
                a.extend(b);
                a
            }
        };
        names.sort();
        Ok(names)
    }

    /// Adds the hard link `link_name` in this group to the object at `target`.
    ///
    /// # Errors
    /// A missing target or an existing name.
    pub fn link_hard(&self, target: &str, link_name: &str) -> Result<()> {
        let w = self.writer()?;
        let mut w = lock(w);
        let t = w
            .resolve(self.0.id, target)
            .ok_or_else(|| Error::from(format!("link target {target} does not exist")))?;
        w.link(self.0.id, link_name, t)
    }

    /// Starts a dataset of element type `T`.
    pub fn new_dataset<T: H5Type>(&self) -> DatasetBuilder {
        DatasetBuilder {
            group: self.clone(),
            dtype: T::type_descriptor(),
            extents: Vec::new(),
            chunk: None,
        }
    }

    /// Starts a dataset defined by its data.
    pub fn new_dataset_builder(&self) -> DatasetBuilderEmpty {
        DatasetBuilderEmpty {
            group: self.clone(),
        }
    }
}

/// Creates a dataset of a known element type.
#[derive(Debug)]
pub struct DatasetBuilder {
    group: Group,
    dtype: TypeDescriptor,
    extents: Vec<(u64, Option<u64>)>,
    chunk: Option<Vec<u64>>,
}

impl DatasetBuilder {
    /// Current and maximum extents; `0..` is unlimited.
    pub fn shape<E: Into<Extents>>(mut self, e: E) -> Self {
        self.extents = e.into().0;
        self
    }

    /// Chunk shape (needed for unlimited extents).
    pub fn chunk<C: Into<Dims>>(mut self, c: C) -> Self {
        self.chunk = Some(c.into().0);
        self
    }

    /// Creates the dataset (zero-filled).
    ///
    /// # Errors
    /// An existing name, an unlimited axis without chunks, a bad chunk shape.
    pub fn create(self, name: &str) -> Result<Dataset> {
        let w = self.group.writer()?;
        let mut w = lock(w);
        let dims: Vec<u64> = self.extents.iter().map(|e| e.0).collect();
        let maxdims: Vec<Option<u64>> = self.extents.iter().map(|e| e.1).collect();
        let unlimited = maxdims.iter().any(Option::is_none);
        let layout = match self.chunk {
            Some(chunk) => {
                if chunk.len() != dims.len() || chunk.contains(&0) {
                    return Err(Error::from(format!(
                        "chunk shape {chunk:?} does not fit the dataset's rank {}",
                        dims.len()
                    )));
                }
                Layout::Chunked {
                    chunk,
                    chunks: Default::default(),
                }
            }
            None if unlimited => {
                return Err(Error::from("an unlimited dataset needs a chunk shape"))
            }
            None => {
                let n: u64 = dims.iter().product();
                Layout::Contiguous {
                    addr: w.allocate(n * self.dtype.size() as u64),
                }
            }
        };
        let id = w.add_child(
            self.group.0.id,
            name,
            Obj {
                kind: Kind::Dataset(Ds {
                    dtype: self.dtype,
                    dims,
                    maxdims,
                    layout,
                }),
                attrs: Vec::new(),
            },
        )?;
        Ok(Dataset(self.group.0.child(name, id)))
    }
}

/// Creates a dataset from data.
#[derive(Debug)]
pub struct DatasetBuilderEmpty {
    group: Group,
}

impl DatasetBuilderEmpty {
    /// The data (and so the type and shape) of the dataset.
    pub fn with_data<'a, A, T, D>(self, data: A) -> DatasetBuilderData<T>
    where
        A: Into<ArrayView<'a, T, D>>,
        T: H5Type,
        D: Dimension,
    {
        let v = data.into();
        DatasetBuilderData {
            group: self.group,
            data: v.to_owned().into_dyn(),
        }
    }
}

/// Creates a dataset holding given data.
#[derive(Debug)]
pub struct DatasetBuilderData<T> {
    group: Group,
    data: ArrayD<T>,
}

impl<T: H5Type> DatasetBuilderData<T> {
    /// Creates the dataset and writes the data.
    ///
    /// # Errors
    /// An existing name or a file open for reading.
    pub fn create(self, name: &str) -> Result<Dataset> {
        let ds = self
            .group
            .new_dataset::<T>()
            .shape(self.data.shape())
            .create(name)?;
        ds.write(&self.data)?;
        Ok(ds)
    }
}

/// (start, count, collapse) per axis of a selection within `dims`.
fn selection(sel: &[SliceInfoElem], dims: &[u64]) -> Result<Vec<(u64, u64, bool)>> {
    let mut out = Vec::with_capacity(dims.len());
    let mut it = sel.iter().filter(|e| !matches!(e, SliceInfoElem::NewAxis));
    for (axis, &d) in dims.iter().enumerate() {
        let e = it.next().cloned().unwrap_or(SliceInfoElem::Slice {
            start: 0,
            end: None,
            step: 1,
        });
        let fix = |i: isize| -> u64 {
            if i < 0 {
                (d as i64 + i as i64).max(0) as u64
            } else {
                i as u64
            }
        };
        let bad = || {
            Error::from(format!(
                "selection {e:?} is outside axis {axis} of extent {d}"
            ))
        };
        match e {
            SliceInfoElem::Index(i) => {
                let i = fix(i);
                if i >= d {
                    return Err(bad());
                }
                out.push((i, 1, true));
            }
            SliceInfoElem::Slice { start, end, step } => {
                if step != 1 {
                    return Err(Error::from("strided selections are not supported"));
                }
                let (s, en) = (fix(start), end.map_or(d, fix));
                if s > en || en > d {
                    return Err(bad());
                }
                out.push((s, en - s, false));
            }
            SliceInfoElem::NewAxis => unreachable!("filtered"),
        }
    }
    if it.next().is_some() {
        return Err(Error::from("the selection has more axes than the dataset"));
    }
    Ok(out)
}

impl Dataset {
    fn with_ds<R>(&self, f: impl FnOnce(&Ds) -> R) -> Option<R> {
        match &self.0.back {
            Backing::Write(w) => match &lock(w).objects[self.0.id].kind {
                Kind::Dataset(ds) => Some(f(ds)),
                Kind::Group { .. } => None,
            },
            Backing::Read(_) => None,
        }
    }

    fn reader(&self) -> Result<hdf5_reader::Dataset> {
        match &self.0.back {
            Backing::Read(r) => Ok(r.dataset(&self.0.path)?),
            Backing::Write(_) => Err(write_only()),
        }
    }

    /// Current extent per axis.
    pub fn shape(&self) -> Vec<usize> {
        match &self.0.back {
            Backing::Write(_) => self
                .with_ds(|d| d.dims.iter().map(|&x| x as usize).collect())
                .unwrap_or_default(),
            Backing::Read(_) => self
                .reader()
                .map(|d| d.shape().iter().map(|&x| x as usize).collect())
                .unwrap_or_default(),
        }
    }

    /// Number of axes.
    pub fn ndim(&self) -> usize {
        self.shape().len()
    }

    /// Number of elements.
    pub fn size(&self) -> usize {
        self.shape().iter().product()
    }

    /// Chunk shape, if chunked.
    pub fn chunk(&self) -> Option<Vec<usize>> {
        match &self.0.back {
            Backing::Write(_) => self
                .with_ds(|d| match &d.layout {
                    Layout::Chunked { chunk, .. } => {
                        Some(chunk.iter().map(|&c| c as usize).collect())
                    }
                    Layout::Contiguous { .. } => None,
                })
                .flatten(),
            Backing::Read(_) => self
                .reader()
                .ok()
                .and_then(|d| d.chunks())
                .map(|c| c.iter().map(|&x| x as usize).collect()),
        }
    }

    /// Whether the dataset is chunked.
    pub fn is_chunked(&self) -> bool {
        self.chunk().is_some()
    }

    /// The stored element type.
    ///
    /// # Errors
    /// An unreadable dataset.
    pub fn dtype(&self) -> Result<Datatype> {
        match &self.0.back {
            Backing::Write(_) => self
                .with_ds(|d| Datatype(d.dtype.clone()))
                .ok_or_else(|| Error::from("not a dataset")),
            Backing::Read(_) => Ok(Datatype(TypeDescriptor::from_reader(
                self.reader()?.dtype(),
            ))),
        }
    }

    /// Changes the extent (within the maximum), dropping chunks wholly outside.
    ///
    /// # Errors
    /// A new extent beyond the maximum or of another rank.
    pub fn resize<D: Into<Dims>>(&self, d: D) -> Result<()> {
        let new = d.into().0;
        let Backing::Write(w) = &self.0.back else {
            return Err(read_only());
        };
        let mut w = lock(w);
        let Kind::Dataset(ds) = &mut w.objects[self.0.id].kind else {
            return Err(Error::from("not a dataset"));
        };
        if new.len() != ds.dims.len()
            || new
                .iter()
                .zip(&ds.maxdims)
                .any(|(n, m)| m.is_some_and(|m| *n > m))
        {
            return Err(Error::from(format!(
                "unable to resize {} to {new:?}: the maximum is {:?}",
                self.0.path, ds.maxdims
            )));
        }
        if let Layout::Chunked { chunk, chunks } = &mut ds.layout {
            chunks.retain(|c, _| {
                c.iter()
                    .zip(chunk.iter())
                    .zip(&new)
                    .all(|((c, k), n)| c * k < *n)
            });
        }
        ds.dims = new;
        w.touch();
        Ok(())
    }

    /// Writes `arr` into the selected part of the dataset.
    ///
    /// # Errors
    /// A selection outside the extent, a shape that does not match it, a file
    /// open for reading.
    pub fn write_slice<'a, A, T, S, D>(&self, arr: A, sel: S) -> Result<()>
    where
        A: Into<ArrayView<'a, T, D>>,
        T: H5Type,
        S: AsRef<[SliceInfoElem]>,
        D: Dimension,
    {
        let view = arr.into();
        let Backing::Write(w) = &self.0.back else {
            return Err(read_only());
        };
        let mut w = lock(w);
        let Kind::Dataset(ds) = &w.objects[self.0.id].kind else {
            return Err(Error::from("not a dataset"));
        };
        let sel = selection(sel.as_ref(), &ds.dims)?;
        let count: u64 = sel.iter().map(|s| s.1).product();
        if count as usize != view.len() {
            return Err(Error::from(format!(
                "{} elements given for a selection of {count}",
                view.len()
            )));
        }
        let values: Vec<T> = view.iter().cloned().collect();
        let bytes = types::encode(&values, &ds.dtype)?;
        let start: Vec<u64> = sel.iter().map(|s| s.0).collect();
        let counts: Vec<u64> = sel.iter().map(|s| s.1).collect();
        write_box(&mut w, self.0.id, &start, &counts, &bytes)
    }

    /// Writes the whole dataset.
    ///
    /// # Errors
    /// A shape that does not match, a file open for reading.
    pub fn write<'a, A, T, D>(&self, arr: A) -> Result<()>
    where
        A: Into<ArrayView<'a, T, D>>,
        T: H5Type,
        D: Dimension,
    {
        let view = arr.into();
        let all: Vec<SliceInfoElem> = Vec::new();
        self.write_slice(view, all)
    }

    /// Writes the single element of a scalar dataset.
    ///
    /// # Errors
    /// A dataset of more than one element; a file open for reading.
    pub fn write_scalar<T: H5Type>(&self, v: &T) -> Result<()> {
        self.write_raw(std::slice::from_ref(v))
    }

    /// Writes the whole dataset from a slice in row-major order.
    ///
    /// # Errors
    /// As [`Dataset::write`].
    pub fn write_raw<T: H5Type>(&self, values: &[T]) -> Result<()> {
        let shape: Vec<usize> = self.shape();
        let view =
            ArrayView::from_shape(IxDyn(&shape), values).map_err(|e| Error::from(e.to_string()))?;
        self.write(view)
    }

    /// Reads the selected part, converted to `T`.
    ///
    /// # Errors
    /// A selection outside the extent; types that do not convert.
    pub fn read_slice<T, S, D>(&self, sel: S) -> Result<ndarray::Array<T, D>>
    where
        T: H5Type,
        S: AsRef<[SliceInfoElem]>,
        D: Dimension,
    {
        let ds = self.reader()?;
        let dims: Vec<u64> = ds.shape().to_vec();
        let sel = selection(sel.as_ref(), &dims)?;
        let out_shape: Vec<usize> = sel.iter().filter(|s| !s.2).map(|s| s.1 as usize).collect();
        let arr = read_box::<T>(&ds, &sel)?;
        arr.into_shape_with_order(IxDyn(&out_shape))
            .map_err(|e| Error::from(e.to_string()))?
            .into_dimensionality::<D>()
            .map_err(|e| Error::from(format!("{}: {e}", self.0.path)))
    }

    /// Reads everything as an n-dimensional array.
    ///
    /// # Errors
    /// Types that do not convert.
    pub fn read<T: H5Type, D: Dimension>(&self) -> Result<ndarray::Array<T, D>> {
        self.read_slice::<T, _, D>(Vec::<SliceInfoElem>::new())
    }

    /// Reads everything in row-major order.
    ///
    /// # Errors
    /// Types that do not convert.
    pub fn read_raw<T: H5Type>(&self) -> Result<Vec<T>> {
        let a: ArrayD<T> = self.read_slice::<T, _, IxDyn>(Vec::<SliceInfoElem>::new())?;
        Ok(a.into_raw_vec_and_offset().0)
    }

    /// Reads a 1-D dataset.
    ///
    /// # Errors
    /// Another rank; types that do not convert.
    pub fn read_1d<T: H5Type>(&self) -> Result<ndarray::Array1<T>> {
        self.read::<T, ndarray::Ix1>()
    }

    /// Reads a 2-D dataset.
    ///
    /// # Errors
    /// Another rank; types that do not convert.
    pub fn read_2d<T: H5Type>(&self) -> Result<ndarray::Array2<T>> {
        self.read::<T, ndarray::Ix2>()
    }

    /// Reads everything as a dynamic-rank array.
    ///
    /// # Errors
    /// Types that do not convert.
    pub fn read_dyn<T: H5Type>(&self) -> Result<ArrayD<T>> {
        self.read::<T, IxDyn>()
    }

    /// Reads the single element of a scalar (or one-element) dataset.
    ///
    /// # Errors
    /// An empty dataset; types that do not convert.
    pub fn read_scalar<T: H5Type>(&self) -> Result<T> {
        self.read_raw::<T>()?
            .into_iter()
            .next()
            .ok_or_else(|| Error::from(format!("dataset {} is empty", self.0.path)))
    }
}

/// Reads a box with `hdf5-reader` in the stored type and converts to `T`.
fn read_box<T: H5Type>(ds: &hdf5_reader::Dataset, sel: &[(u64, u64, bool)]) -> Result<ArrayD<T>> {
    let info = hdf5_reader::SliceInfo {
        selections: sel
            .iter()
            .map(|&(s, c, _)| hdf5_reader::SliceInfoElem::Slice {
                start: s,
                end: s + c,
                step: 1,
            })
            .collect(),
    };
    let desc = TypeDescriptor::from_reader(ds.dtype());
    fn convert<S: H5Type, T: H5Type>(a: ArrayD<S>) -> Result<ArrayD<T>> {
        let any: Box<dyn std::any::Any> = Box::new(a);
        match any.downcast::<ArrayD<T>>() {
            Ok(same) => Ok(*same),
            Err(any) => {
                let a = any.downcast::<ArrayD<S>>().expect("the array just boxed");
                let mut err = None;
                let out = a.mapv(|v| {
                    v.to_number().and_then(T::from_number).unwrap_or_else(|| {
                        err = Some(Error::from(format!(
                            "cannot convert {} to {}",
                            S::type_descriptor(),
                            T::type_descriptor()
                        )));
                        T::from_number(types::Number::Int(0)).expect("numeric target")
                    })
                });
                err.map_or(Ok(out), Err)
            }
        }
    }
    use types::{FloatSize as F, IntSize as I};
    let numeric_target = T::from_number(types::Number::Int(0)).is_some();
    if !numeric_target {
        // Strings: read all, then cut the box out.
        let strings = ds.read_strings()?;
        let dims: Vec<usize> = ds.shape().iter().map(|&d| d as usize).collect();
        let all = ArrayD::from_shape_vec(IxDyn(&dims), strings)
            .map_err(|e| Error::from(e.to_string()))?;
        let view = all.slice_each_axis(|ax| {
            let (s, c, _) = sel[ax.axis.index()];
            ndarray::Slice::from(s as usize..(s + c) as usize)
        });
        let mut out = Vec::with_capacity(view.len());
        for s in view.iter() {
            out.push(T::from_text(s).ok_or_else(|| {
                Error::from(format!("cannot convert {desc} to {}", T::type_descriptor()))
            })?);
        }
        return ArrayD::from_shape_vec(view.raw_dim(), out).map_err(|e| Error::from(e.to_string()));
    }
    match desc {
        TypeDescriptor::Float(F::U4) => convert::<f32, T>(ds.read_slice::<f32>(&info)?),
        TypeDescriptor::Float(F::U8) => convert::<f64, T>(ds.read_slice::<f64>(&info)?),
        TypeDescriptor::Integer(I::U1) => convert::<i8, T>(ds.read_slice::<i8>(&info)?),
        TypeDescriptor::Integer(I::U2) => convert::<i16, T>(ds.read_slice::<i16>(&info)?),
        TypeDescriptor::Integer(I::U4) => convert::<i32, T>(ds.read_slice::<i32>(&info)?),
        TypeDescriptor::Integer(I::U8) => convert::<i64, T>(ds.read_slice::<i64>(&info)?),
        TypeDescriptor::Unsigned(I::U1) => convert::<u8, T>(ds.read_slice::<u8>(&info)?),
        TypeDescriptor::Unsigned(I::U2) => convert::<u16, T>(ds.read_slice::<u16>(&info)?),
        TypeDescriptor::Unsigned(I::U4) => convert::<u32, T>(ds.read_slice::<u32>(&info)?),
        TypeDescriptor::Unsigned(I::U8) => convert::<u64, T>(ds.read_slice::<u64>(&info)?),
        other => Err(Error::from(format!(
            "cannot convert {other} to {}",
            T::type_descriptor()
        ))),
    }
}

/// Scatters a row-major box of element bytes into a dataset's storage.
fn write_box(w: &mut Writer, id: ObjId, start: &[u64], counts: &[u64], bytes: &[u8]) -> Result<()> {
    if counts.contains(&0) {
        return Ok(());
    }
    let Kind::Dataset(ds) = &w.objects[id].kind else {
        return Err(Error::from("not a dataset"));
    };
    let es = ds.dtype.size() as u64;
    let rank = start.len();
    // Storage regions: (origin, dims, address) — one for contiguous data,
    // one per chunk the box touches (allocated when first written).
    let mut regions: Vec<(Vec<u64>, Vec<u64>, Option<u64>)> = Vec::new();
    match &ds.layout {
        Layout::Contiguous { addr } => regions.push((vec![0; rank], ds.dims.clone(), Some(*addr))),
        Layout::Chunked { chunk, chunks } => {
            let lo: Vec<u64> = (0..rank).map(|d| start[d] / chunk[d]).collect();
            let hi: Vec<u64> = (0..rank)
                .map(|d| (start[d] + counts[d] - 1) / chunk[d])
                .collect();
            let end: Vec<u64> = hi.iter().map(|h| h + 1).collect();
            let mut c = lo.clone();
            loop {
                let origin: Vec<u64> = (0..rank).map(|d| c[d] * chunk[d]).collect();
                regions.push((origin, chunk.clone(), chunks.get(&c).copied()));
                if !step(&mut c, &lo, &end) {
                    break;
                }
            }
        }
    }
    for (origin, rdims, addr) in regions {
        let addr = match addr {
            Some(a) => a,
            None => {
                let n: u64 = rdims.iter().product();
                let a = w.allocate(n * es);
                if let Kind::Dataset(Ds {
                    layout: Layout::Chunked { chunk, chunks },
                    ..
                }) = &mut w.objects[id].kind
                {
                    let coords = origin
                        .iter()
                        .zip(chunk.iter())
                        .map(|(o, c)| o / c)
                        .collect();
                    chunks.insert(coords, a);
                }
                w.touch();
                a
            }
        };
        // Intersection of the box with this region.
        let ist: Vec<u64> = (0..rank).map(|d| start[d].max(origin[d])).collect();
        let ien: Vec<u64> = (0..rank)
            .map(|d| (start[d] + counts[d]).min(origin[d] + rdims[d]))
            .collect();
        let icnt: Vec<u64> = (0..rank).map(|d| ien[d] - ist[d]).collect();
        // Inner axes the intersection covers wholly in both the region and the
        // box merge into one run.
        let mut k = rank.saturating_sub(1);
        while k > 0 && icnt[k] == rdims[k] && icnt[k] == counts[k] {
            k -= 1;
        }
        let run: u64 = icnt[k..].iter().product();
        let stride = |dims: &[u64]| -> Vec<u64> {
            let mut s = vec![1u64; rank];
            for d in (0..rank.saturating_sub(1)).rev() {
                s[d] = s[d + 1] * dims[d + 1];
            }
            s
        };
        let (rs, bs) = (stride(&rdims), stride(counts));
        let mut idx = vec![0u64; k];
        let zero = vec![0u64; k];
        loop {
            let mut roff = 0;
            let mut boff = 0;
            for d in 0..rank {
                let i = ist[d] + if d < k { idx[d] } else { 0 };
                roff += (i - origin[d]) * rs[d];
                boff += (i - start[d]) * bs[d];
            }
            let src = &bytes[(boff * es) as usize..((boff + run) * es) as usize];
            w.write_at(addr + roff * es, src)?;
            if !step(&mut idx, &zero, &icnt[..k]) {
                break;
            }
        }
    }
    Ok(())
}

/// Steps `idx` in row-major order, axis d from `lo[d]` to before `hi[d]`;
/// false once every index was visited.
fn step(idx: &mut [u64], lo: &[u64], hi: &[u64]) -> bool {
    for d in (0..idx.len()).rev() {
        idx[d] += 1;
        if idx[d] < hi[d] {
            return true;
        }
        idx[d] = lo[d];
    }
    false
}

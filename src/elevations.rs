//! Where the surveys' elevations on the analysis grid live: in memory for an ordinary job, or in an
//! unnamed scratch file mapped into memory when the stack is large.
//!
//! A run visits the surveys a pair at a time (co-registration, the pairs' fields and landforms, the
//! frames of one interval, one pair's maps), so holding every grid in memory at once only makes the
//! peak grow with the length of the series: twelve 4096² surveys are 805 MB of elevations alone. A
//! stack above [`SCRATCH_FILE_ABOVE_BYTES`] is kept in a file in the system's temporary folder
//! (`TMPDIR`), mapped shared, and [`Elevations::let_go`] hands its pages back to the system after
//! each piece of work; the next read fetches them again from the file (usually still in the page
//! cache), so the values never change. The file has no name on disk and vanishes when the run ends,
//! however it ends.
//!
//! Invariant: every grid has the same shape, `rows × cols`, and the store holds exactly `len` of them.

use std::io;

use ndarray::{Array2, ArrayRef2, ArrayView2, ArrayViewMut2};

/// Stacks larger than this, in bytes, are kept in a mapped scratch file rather than in memory
/// (256 MiB: sixteen 2048² grids, four 4096² grids; the standard 1024² job stays in memory).
pub const SCRATCH_FILE_ABOVE_BYTES: usize = 256 << 20;

/// The elevations of every survey of a stack, one `rows × cols` grid each.
#[derive(Debug)]
pub struct Elevations {
    rows: usize,
    cols: usize,
    store: Store,
}

#[derive(Debug)]
enum Store {
    Memory(Vec<Array2<f32>>),
    /// Grid `i` is `cells` floats from float `i * cells`. The file is kept open for the map's life.
    Mapped {
        map: memmap2::MmapMut,
        len: usize,
        _file: std::fs::File,
    },
}

impl Clone for Elevations {
    /// A clone is always held in memory (tests and library callers clone small stacks).
    fn clone(&self) -> Self {
        Elevations {
            rows: self.rows,
            cols: self.cols,
            store: Store::Memory((0..self.len()).map(|i| self.z(i).to_owned()).collect()),
        }
    }
}

impl Elevations {
    /// Room for `len` grids of `rows × cols`, all zero until written: in memory, or in a scratch
    /// file when they take more than [`SCRATCH_FILE_ABOVE_BYTES`].
    ///
    /// # Errors
    /// When the scratch file cannot be made or its space reserved (the message names the folder and
    /// the size, and says to point `TMPDIR` at a folder with room).
    pub fn new(len: usize, rows: usize, cols: usize) -> io::Result<Self> {
        let bytes = len * rows * cols * std::mem::size_of::<f32>();
        if bytes > SCRATCH_FILE_ABOVE_BYTES {
            Self::in_scratch_file(len, rows, cols)
        } else {
            Ok(Self::in_memory(len, rows, cols))
        }
    }

    /// Room for `len` grids held in memory.
    pub fn in_memory(len: usize, rows: usize, cols: usize) -> Self {
        Elevations {
            rows,
            cols,
            store: Store::Memory(vec![Array2::zeros((rows, cols)); len]),
        }
    }

    /// Room for `len` grids in an unnamed file in the temporary folder, mapped shared. The file's
    /// blocks are reserved up front (and read as zeros), so a full disk is an error here and never
    /// a crash while writing through the map.
    ///
    /// # Errors
    /// As [`Elevations::new`].
    pub fn in_scratch_file(len: usize, rows: usize, cols: usize) -> io::Result<Self> {
        Self::in_scratch_file_in(&std::env::temp_dir(), len, rows, cols)
    }

    /// Like [`Elevations::in_scratch_file`], in `folder` rather than the temporary folder.
    ///
    /// # Errors
    /// As [`Elevations::new`].
    pub fn in_scratch_file_in(
        folder: &std::path::Path,
        len: usize,
        rows: usize,
        cols: usize,
    ) -> io::Result<Self> {
        let bytes = len * rows * cols * std::mem::size_of::<f32>();
        let explain = |e: io::Error| {
            io::Error::new(
                e.kind(),
                format!(
                    "cannot keep the {len} aligned grids ({} MiB) in a scratch file in {}: {e}; set \
                     TMPDIR to a folder with that much free space",
                    bytes >> 20,
                    folder.display()
                ),
            )
        };
        let file = tempfile::tempfile_in(folder).map_err(explain)?;
        if in_memory_file_system(folder) {
            log::warn!(
                "the temporary folder {} is a memory file system (tmpfs), so the scratch file of \
                 the {len} aligned grids ({} MiB) takes that much memory anyway; set TMPDIR to a \
                 folder on disk to keep the run's memory bounded",
                folder.display(),
                bytes >> 20
            );
        }
        reserve(&file, bytes).map_err(explain)?;
        // SAFETY: the file is unnamed and private to this process, so nothing else can change or
        // truncate it while mapped; its blocks are reserved, so writes through the map cannot fault.
        let map = unsafe { memmap2::MmapMut::map_mut(&file) }.map_err(explain)?;
        Ok(Elevations {
            rows,
            cols,
            store: Store::Mapped {
                map,
                len,
                _file: file,
            },
        })
    }

    /// Number of grids.
    pub fn len(&self) -> usize {
        match &self.store {
            Store::Memory(v) => v.len(),
            Store::Mapped { len, .. } => *len,
        }
    }

    /// True when there are no grids.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// True when the grids are kept in a scratch file.
    pub fn is_mapped(&self) -> bool {
        matches!(self.store, Store::Mapped { .. })
    }

    /// Grid `i`.
    ///
    /// # Panics
    /// When `i >= len`.
    pub fn z(&self, i: usize) -> ArrayView2<'_, f32> {
        match &self.store {
            Store::Memory(v) => v[i].view(),
            Store::Mapped { map, len, .. } => {
                assert!(i < *len, "grid {i} of {len}");
                let cells = self.rows * self.cols;
                let all = floats(map);
                ArrayView2::from_shape((self.rows, self.cols), &all[i * cells..(i + 1) * cells])
                    .expect("the store's length matches its shape")
            }
        }
    }

    /// Grid `i`, to change in place.
    ///
    /// # Panics
    /// When `i >= len`.
    pub fn z_mut(&mut self, i: usize) -> ArrayViewMut2<'_, f32> {
        let (rows, cols) = (self.rows, self.cols);
        match &mut self.store {
            Store::Memory(v) => v[i].view_mut(),
            Store::Mapped { map, len, .. } => {
                assert!(i < *len, "grid {i} of {len}");
                let cells = rows * cols;
                let all = floats_mut(map);
                ArrayViewMut2::from_shape((rows, cols), &mut all[i * cells..(i + 1) * cells])
                    .expect("the store's length matches its shape")
            }
        }
    }

    /// Sets grid `i` to `z`. A scratch-file store writes it to the file rather than through the
    /// map: a first write through the map would make the system read (zero-fill) each page
    /// before it is overwritten, which took more time than reading the GeoTIFFs.
    ///
    /// # Errors
    /// When the scratch file cannot be written.
    ///
    /// # Panics
    /// When `i >= len` or `z` has another shape.
    pub fn set(&mut self, i: usize, z: &ArrayRef2<f32>) -> io::Result<()> {
        assert_eq!(z.dim(), (self.rows, self.cols), "grid shape");
        let cells = self.rows * self.cols;
        match &mut self.store {
            Store::Memory(v) => v[i].assign(z),
            Store::Mapped {
                len, _file: file, ..
            } => {
                assert!(i < *len, "grid {i} of {len}");
                let laid_out = z.as_standard_layout();
                let values = laid_out.as_slice().expect("standard layout");
                let offset = (i * cells * std::mem::size_of::<f32>()) as u64;
                write_at(file, bytemuck::cast_slice(values), offset)?;
            }
        }
        Ok(())
    }

    /// Hands the memory of a scratch-file store back to the system; the next read of a grid
    /// fetches it again from the file, with the same values. Nothing happens to an in-memory store.
    /// Call it when a piece of work that read some grids is done; it is safe at any time, even
    /// while other threads read.
    pub fn let_go(&self) {
        if let Store::Mapped { map, .. } = &self.store {
            // SAFETY: for a shared file mapping, MADV_DONTNEED only drops this process's page
            // table entries; the data stays in the page cache and the file, and is read back on
            // the next access, so no value a reader sees can change. The map is never private.
            // A failure leaves the pages resident, which costs memory, not correctness.
            #[cfg(unix)]
            let _ = unsafe { map.unchecked_advise(memmap2::UncheckedAdvice::DontNeed) };
            #[cfg(not(unix))]
            let _ = map;
        }
    }
}

/// The map's bytes as floats (the map is page-aligned and a whole number of floats long).
fn floats(map: &memmap2::MmapMut) -> &[f32] {
    bytemuck::cast_slice(&map[..])
}

fn floats_mut(map: &mut memmap2::MmapMut) -> &mut [f32] {
    bytemuck::cast_slice_mut(&mut map[..])
}

/// True when `folder` lies on a file system held in memory (tmpfs, ramfs), where a scratch file
/// saves no memory. False when it cannot be told.
fn in_memory_file_system(folder: &std::path::Path) -> bool {
    #[cfg(target_os = "linux")]
    {
        use std::os::unix::ffi::OsStrExt;
        // Magic numbers of tmpfs and ramfs, from linux/magic.h.
        const TMPFS_MAGIC: i64 = 0x0102_1994;
        const RAMFS_MAGIC: i64 = 0x8584_58f6;
        let Ok(path) = std::ffi::CString::new(folder.as_os_str().as_bytes()) else {
            return false;
        };
        let mut fs = std::mem::MaybeUninit::<libc::statfs>::uninit();
        // SAFETY: `path` is a valid C string and `fs` is written by the call before it is read.
        if unsafe { libc::statfs(path.as_ptr(), fs.as_mut_ptr()) } != 0 {
            return false;
        }
        // SAFETY: statfs returned 0, so it filled `fs`.
        #[allow(clippy::unnecessary_cast)] // f_type's width differs between C libraries
        let kind = unsafe { fs.assume_init() }.f_type as i64;
        kind == TMPFS_MAGIC || kind == RAMFS_MAGIC
    }
    #[cfg(not(target_os = "linux"))]
    {
        let _ = folder;
        false
    }
}

/// Writes all of `bytes` at `offset` in `file`.
fn write_at(file: &std::fs::File, bytes: &[u8], offset: u64) -> io::Result<()> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileExt;
        file.write_all_at(bytes, offset)
    }
    #[cfg(not(unix))]
    {
        use std::io::{Seek, SeekFrom, Write};
        let mut f = file;
        f.seek(SeekFrom::Start(offset))?;
        f.write_all(bytes)
    }
}

/// Gives `file` `bytes` of reserved blocks (not a sparse hole), so writing through a map cannot
/// run out of space half way.
fn reserve(file: &std::fs::File, bytes: usize) -> io::Result<()> {
    #[cfg(target_os = "linux")]
    {
        use std::os::unix::io::AsRawFd;
        // SAFETY: a plain system call on an open descriptor we own.
        let rc = unsafe { libc::posix_fallocate(file.as_raw_fd(), 0, bytes as libc::off_t) };
        if rc != 0 {
            return Err(io::Error::from_raw_os_error(rc));
        }
        Ok(())
    }
    #[cfg(not(target_os = "linux"))]
    {
        file.set_len(bytes as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ramp(rows: usize, cols: usize, k: f32) -> Array2<f32> {
        Array2::from_shape_fn((rows, cols), |(r, c)| k + (r * cols + c) as f32 * 0.25)
    }

    #[test]
    fn a_scratch_file_store_reads_back_what_was_written_after_letting_go() {
        // Check: common practice — a change of storage must give back every value bit for bit;
        // the in-memory store is the reference.
        let (rows, cols) = (37, 53);
        let mut mapped = Elevations::in_scratch_file(3, rows, cols).unwrap();
        let mut memory = Elevations::in_memory(3, rows, cols);
        assert!(mapped.is_mapped() && !memory.is_mapped());
        for i in 0..3 {
            // Unwritten grids are zero in both.
            assert!(mapped.z(i).iter().all(|&v| v == 0.0));
            assert!(memory.z(i).iter().all(|&v| v == 0.0));
            let g = ramp(rows, cols, i as f32 * 100.0);
            if i == 1 {
                // Written through the map and through the file alike.
                mapped.z_mut(i).assign(&g);
            } else {
                mapped.set(i, &g).unwrap();
            }
            memory.set(i, &g).unwrap();
            mapped.let_go();
        }
        mapped.z_mut(1)[[5, 7]] = -3.5;
        memory.z_mut(1)[[5, 7]] = -3.5;
        mapped.let_go();
        for i in 0..3 {
            assert_eq!(mapped.z(i), memory.z(i), "grid {i}");
            assert_eq!(mapped.z(i).dim(), (rows, cols));
        }
        assert_eq!(mapped.z(2)[[36, 52]], 200.0 + (36 * 53 + 52) as f32 * 0.25);
        // A clone lives in memory and holds the same values.
        let copy = mapped.clone();
        assert!(!copy.is_mapped());
        assert_eq!(copy.z(1), mapped.z(1));
    }

    #[test]
    fn a_scratch_folder_that_cannot_be_used_is_named_with_the_fix() {
        // Check: common practice — the message names the place, the size (12 × 4096² × 4 bytes
        // = 768 MiB, analytic) and the fix.
        let missing = std::env::temp_dir().join("dunereel-no-such-folder-for-this-test");
        let err = Elevations::in_scratch_file_in(&missing, 12, 4096, 4096).unwrap_err();
        let text = err.to_string();
        assert!(
            text.contains("12 aligned grids (768 MiB)")
                && text.contains(&missing.display().to_string())
                && text.contains("set TMPDIR"),
            "{text}"
        );
    }

    #[test]
    fn a_memory_file_system_is_told_from_a_disk() {
        // Check: statfs(2) and TMPFS_MAGIC 0x01021994 from linux/magic.h; /dev/shm is tmpfs on
        // Linux wherever it exists (common practice).
        if cfg!(target_os = "linux") && std::path::Path::new("/dev/shm").is_dir() {
            assert!(in_memory_file_system(std::path::Path::new("/dev/shm")));
        }
        // A folder that cannot be asked about is not taken for memory.
        assert!(!in_memory_file_system(std::path::Path::new(
            "/no/such/folder/for/dunereel"
        )));
    }

    #[test]
    fn letting_go_hands_the_pages_back() {
        // Check: madvise(2) — MADV_DONTNEED on a shared file mapping drops the pages from the
        // process and reads them back from the file. 64 MiB of grids: resident after writing, far
        // less after letting go (the map's pages count as file or shared memory, not heap).
        let mut e = Elevations::in_scratch_file(4, 2048, 2048).unwrap();
        for i in 0..4 {
            e.z_mut(i).fill(i as f32);
        }
        let before = resident_kib();
        e.let_go();
        let after = resident_kib();
        if let (Some(before), Some(after)) = (before, after) {
            assert!(
                after + 32 * 1024 < before,
                "resident {before} KiB before letting go, {after} KiB after"
            );
        }
        assert!(e.z(3).iter().all(|&v| v == 3.0));
    }

    /// This process's resident memory that maps files (RssFile + RssShmem: a tmpfs TMPDIR counts
    /// as shared memory) from /proc on Linux; None elsewhere. Other tests running at the same
    /// time allocate from the heap, which this leaves out.
    fn resident_kib() -> Option<u64> {
        let status = std::fs::read_to_string("/proc/self/status").ok()?;
        let kib = |key: &str| -> Option<u64> {
            let line = status.lines().find(|l| l.starts_with(key))?;
            line.split_whitespace().nth(1)?.parse().ok()
        };
        Some(kib("RssFile:")? + kib("RssShmem:")?)
    }
}

//! The broadcasting engine: operands in, one row kernel called per broadcast
//! row, results out. Every element-wise function of every model goes through
//! here, so broadcasting, dtype handling, layout independence, parallelism
//! and the reporting of bad rows are written once.
//!
//! An operand is an array whose last `core` axes belong to one item (1 for a
//! point `(..., d)`, 0 for a scalar `(...)`); the leading axes broadcast like
//! NumPy. The kernel sees each item as a contiguous `&[f64]` whatever the
//! memory layout or dtype of the input (f32 inputs are widened on the fly),
//! and writes one output item. Rows are independent, so results are
//! bit-identical for any number of threads.

use ndarray::{ArrayD, ArrayViewD, IxDyn};
use rayon::prelude::*;
use std::sync::Mutex;

use crate::error::{looks_transposed, row_error, Error, Fault, Result, RowFault};

/// Borrowed input data, float64 or float32, any strides.
#[derive(Clone)]
pub enum Data<'a> {
    F64(ArrayViewD<'a, f64>),
    F32(ArrayViewD<'a, f32>),
    /// float64 values from a bare Python number: read like `F64`, but (like
    /// NumPy's weak scalars) not counted when choosing the result dtype.
    Weak(ArrayViewD<'a, f64>),
}

impl<'a> Data<'a> {
    pub fn shape(&self) -> &[usize] {
        match self {
            Data::F64(a) | Data::Weak(a) => a.shape(),
            Data::F32(a) => a.shape(),
        }
    }
    pub fn is_weak(&self) -> bool {
        matches!(self, Data::Weak(_))
    }
    pub fn is_f32(&self) -> bool {
        matches!(self, Data::F32(_))
    }
}

impl<'a> From<ArrayViewD<'a, f64>> for Data<'a> {
    fn from(a: ArrayViewD<'a, f64>) -> Self {
        Data::F64(a)
    }
}

impl<'a> From<ArrayViewD<'a, f32>> for Data<'a> {
    fn from(a: ArrayViewD<'a, f32>) -> Self {
        Data::F32(a)
    }
}

/// Whether an operand carries points (last axis) or scalars.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Core {
    Point,
    Scalar,
}

/// One named operand of an element-wise function.
#[derive(Clone)]
pub struct Operand<'a> {
    pub name: &'static str,
    pub data: Data<'a>,
    pub core: Core,
}

impl<'a> Operand<'a> {
    pub fn point(name: &'static str, data: impl Into<Data<'a>>) -> Self {
        Operand { name, data: data.into(), core: Core::Point }
    }
    pub fn scalar(name: &'static str, data: impl Into<Data<'a>>) -> Self {
        Operand { name, data: data.into(), core: Core::Scalar }
    }
    fn lead_shape(&self) -> &[usize] {
        let s = self.data.shape();
        match self.core {
            Core::Point => &s[..s.len() - 1],
            Core::Scalar => s,
        }
    }
}

/// A float64 or float32 result.
#[derive(Debug, Clone, PartialEq)]
pub enum Output {
    F64(ArrayD<f64>),
    F32(ArrayD<f32>),
}

impl Output {
    pub fn shape(&self) -> &[usize] {
        match self {
            Output::F64(a) => a.shape(),
            Output::F32(a) => a.shape(),
        }
    }
    /// The result as float64 (a copy when it is float32).
    pub fn into_f64(self) -> ArrayD<f64> {
        match self {
            Output::F64(a) => a,
            Output::F32(a) => a.mapv(f64::from),
        }
    }
}

/// The result dtype policy, written once: float32 when every array operand is
/// float32, float64 otherwise.
pub fn wants_f32(ops: &[Operand]) -> bool {
    let mut strong = ops.iter().filter(|o| !o.data.is_weak()).peekable();
    strong.peek().is_some() && strong.all(|o| o.data.is_f32())
}

/// Shapes of the operands checked and broadcast; `d` is the common point
/// dimension (0 when no operand is a point).
pub struct Layout {
    pub lead: Vec<usize>,
    pub d: usize,
}

/// Checks point dimensions and broadcasts the leading shapes (NumPy rules).
pub fn layout(ops: &[Operand]) -> Result<Layout> {
    let mut d: Option<(usize, &str)> = None;
    for o in ops {
        if o.core == Core::Point {
            let s = o.data.shape();
            if s.is_empty() {
                return Err(Error::Value(format!(
                    "{} must have at least one dimension: points lie along the last axis, shape (..., d)",
                    o.name
                )));
            }
            let dd = s[s.len() - 1];
            if dd == 0 {
                return Err(Error::Value(format!(
                    "{} has points of dimension 0; the last axis must have length d >= 1",
                    o.name
                )));
            }
            match d {
                None => d = Some((dd, o.name)),
                Some((d0, n0)) if d0 != dd => {
                    return Err(Error::Value(format!(
                        "mismatched point dimension: {n0} has d = {d0} but {} has d = {dd}{}",
                        o.name,
                        transpose_hint(ops, d0, dd)
                    )))
                }
                _ => {}
            }
        }
    }
    let nd = ops.iter().map(|o| o.lead_shape().len()).max().unwrap_or(0);
    let mut lead = vec![1usize; nd];
    for o in ops {
        let ls = o.lead_shape();
        let off = nd - ls.len();
        for (i, &n) in ls.iter().enumerate() {
            let cur = &mut lead[off + i];
            if *cur == 1 {
                *cur = n;
            } else if n != 1 && n != *cur {
                let shapes: Vec<String> = ops.iter().map(|o| format!("{} {:?}", o.name, o.lead_shape())).collect();
                return Err(Error::Value(format!(
                    "leading shapes cannot be broadcast together: {}",
                    shapes.join(", ")
                )));
            }
        }
    }
    Ok(Layout { lead, d: d.map(|x| x.0).unwrap_or(0) })
}

/// For a dimension mismatch between `d0` and `d1`: a note when one point
/// operand looks like a transposed `(d, n)` array whose first axis matches
/// the other dimension.
fn transpose_hint(ops: &[Operand], d0: usize, d1: usize) -> String {
    for o in ops.iter().filter(|o| o.core == Core::Point) {
        let s = o.data.shape();
        if looks_transposed(s) && ((s[1] == d0 && s[0] == d1) || (s[1] == d1 && s[0] == d0)) {
            return format!(
                " ({} has shape ({}, {}): if it holds {} points of dimension {}, pass its transpose ({}.T); \
                 points lie along the last axis)",
                o.name, s[0], s[1], s[1], s[0], o.name
            );
        }
    }
    String::new()
}

/// Raw access to one operand in the broadcast frame.
struct Access {
    ptr: *const u8,
    f32: bool,
    /// Element strides of the broadcast leading axes (0 where broadcast).
    lead_strides: Vec<isize>,
    /// Element stride along the point axis.
    core_stride: isize,
    /// Items per row: d for points, 1 for scalars.
    len: usize,
    /// The operand's own leading shape, aligned right in the broadcast frame.
    own_lead: Vec<usize>,
}

// The pointers come from views borrowed for the whole call; kernels only read.
unsafe impl Send for Access {}
unsafe impl Sync for Access {}

impl Access {
    fn new(o: &Operand, nd: usize, d: usize) -> Access {
        let (ptr, f32, shape, strides): (*const u8, bool, Vec<usize>, Vec<isize>) = match &o.data {
            Data::F64(a) | Data::Weak(a) => (a.as_ptr() as *const u8, false, a.shape().to_vec(), a.strides().to_vec()),
            Data::F32(a) => (a.as_ptr() as *const u8, true, a.shape().to_vec(), a.strides().to_vec()),
        };
        let (nlead, core_stride, len) = match o.core {
            Core::Point => (shape.len() - 1, strides[shape.len() - 1], d),
            Core::Scalar => (shape.len(), 0, 1),
        };
        let off = nd - nlead;
        let mut lead_strides = vec![0isize; nd];
        for i in 0..nlead {
            lead_strides[off + i] = if shape[i] == 1 { 0 } else { strides[i] };
        }
        let mut own_lead = vec![1usize; nd];
        own_lead[off..].copy_from_slice(&shape[..nlead]);
        Access { ptr, f32, lead_strides, core_stride, len, own_lead }
    }

    /// The row at broadcast multi-index `idx`, as a contiguous f64 slice
    /// (borrowed in place when possible, else copied into `buf`).
    #[inline]
    unsafe fn row<'b>(&self, idx: &[usize], buf: &'b mut Vec<f64>) -> &'b [f64] {
        let mut off: isize = 0;
        for (i, s) in idx.iter().zip(&self.lead_strides) {
            off += *i as isize * *s;
        }
        buf.clear();
        if self.f32 {
            let p = (self.ptr as *const f32).offset(off);
            for j in 0..self.len {
                buf.push(f64::from(*p.offset(j as isize * self.core_stride)));
            }
        } else {
            let p = (self.ptr as *const f64).offset(off);
            if self.core_stride == 1 || self.len == 1 {
                // Borrow in place: no copy for contiguous rows.
                return std::slice::from_raw_parts(p, self.len);
            }
            for j in 0..self.len {
                buf.push(*p.offset(j as isize * self.core_stride));
            }
        }
        &buf[..]
    }

    /// The operand's own row number (flat, C order) for a broadcast index.
    fn own_row(&self, idx: &[usize]) -> (usize, Vec<usize>) {
        let mut flat = 0usize;
        let mut own = Vec::new();
        for (k, &n) in self.own_lead.iter().enumerate() {
            let i = if n == 1 { 0 } else { idx[k] };
            flat = flat * n + i;
            own.push(i);
        }
        (flat, own)
    }
}

/// Rows per parallel task: large enough to amortise scheduling, small enough
/// to balance. Independent of the thread count, so results never depend on it.
fn chunk_rows(n: usize, work_per_row: usize) -> usize {
    let target = (1usize << 17) / work_per_row.max(1);
    target.clamp(64, 1 << 16).min(n.max(1))
}

fn unravel(mut r: usize, shape: &[usize], idx: &mut [usize]) {
    for k in (0..shape.len()).rev() {
        let n = shape[k];
        idx[k] = r % n;
        r /= n;
    }
}

#[inline]
fn advance(idx: &mut [usize], shape: &[usize]) {
    for k in (0..shape.len()).rev() {
        idx[k] += 1;
        if idx[k] < shape[k] {
            return;
        }
        idx[k] = 0;
    }
}

fn format_fault(ops: &[Operand], f: RowFault, own: &[usize], nd: usize) -> Error {
    let o = &ops[f.arg];
    let nlead = o.lead_shape().len();
    row_error(o.name, o.data.shape(), &own[nd - nlead..], f.fault, o.data.is_f32())
}

/// A fault located: (argument, its own flat row, the fault, its own index).
type FaultAt = (usize, usize, RowFault, Vec<usize>);

/// The row loop of one chunk. Always inlined, so that it is compiled inside
/// the feature-enabled copy chosen by `simd::dispatch`, kernel included.
#[inline(always)]
fn run_chunk<K>(
    acc: &[Access],
    lead: &[usize],
    out_len: usize,
    kernel: &K,
    start: usize,
    block: &mut [f64],
) -> Option<FaultAt>
where
    K: Fn(&[&[f64]], &mut [f64]) -> std::result::Result<(), RowFault>,
{
    let mut idx = vec![0usize; lead.len()];
    unravel(start, lead, &mut idx);
    let mut bufs: [Vec<f64>; 8] = Default::default();
    for (b, a) in bufs.iter_mut().zip(acc) {
        b.reserve(a.len);
    }
    let mut local: Option<FaultAt> = None;
    for orow in block.chunks_exact_mut(out_len) {
        let res = {
            let mut rows: [&[f64]; 8] = [&[]; 8];
            for ((r, a), b) in rows.iter_mut().zip(acc).zip(bufs.iter_mut()) {
                // SAFETY: idx is within the broadcast shape, so every offset
                // is inside the operand's borrowed view.
                *r = unsafe { a.row(&idx, b) };
            }
            kernel(&rows[..acc.len()], orow)
        };
        if let Err(f) = res {
            let (flat, own) = acc[f.arg].own_row(&idx);
            if local.as_ref().map_or(true, |l| (f.arg, flat) < (l.0, l.1)) {
                local = Some((f.arg, flat, f, own));
            }
        }
        advance(&mut idx, lead);
    }
    local
}

/// Calls `kernel(rows, out_row)` for every broadcast row and collects the
/// results into an array of shape `lead + out_core(d)`.
///
/// `work_per_row` is a rough cost in flops, used only to size parallel
/// chunks. On a fault, reports the first failing operand (in argument order)
/// at its first failing row, counted in that operand's own shape.
pub fn map_rows<K>(
    ops: &[Operand],
    out_core: &dyn Fn(usize) -> Vec<usize>,
    work_per_row: usize,
    kernel: K,
) -> Result<Output>
where
    K: Fn(&[&[f64]], &mut [f64]) -> std::result::Result<(), RowFault> + Sync,
{
    map_rows_with(ops, out_core, work_per_row, false, kernel)
}

/// [`map_rows`] with `force_f64` set when an input that is not a broadcast
/// operand (a matrix, say) is float64, so the result must be float64 too.
pub fn map_rows_with<K>(
    ops: &[Operand],
    out_core: &dyn Fn(usize) -> Vec<usize>,
    work_per_row: usize,
    force_f64: bool,
    kernel: K,
) -> Result<Output>
where
    K: Fn(&[&[f64]], &mut [f64]) -> std::result::Result<(), RowFault> + Sync,
{
    let lay = layout(ops)?;
    let nd = lay.lead.len();
    let n: usize = lay.lead.iter().product();
    let oc = out_core(lay.d);
    let out_len: usize = oc.iter().product();
    let mut shape = lay.lead.clone();
    shape.extend_from_slice(&oc);
    let f32_out = wants_f32(ops) && !force_f64;
    let acc: Vec<Access> = ops.iter().map(|o| Access::new(o, nd, lay.d)).collect();
    // Zero-filled: large allocations come from fresh (already zero) pages,
    // and handing uninitialised memory to the kernels as `&mut [f64]` would
    // be unsound even though they write every element before reading it.
    let mut out = vec![0f64; n * out_len];
    let first_fault: Mutex<Option<FaultAt>> = Mutex::new(None);

    let merge = |l: Option<FaultAt>| {
        if let Some(l) = l {
            let mut g = first_fault.lock().unwrap_or_else(|e| e.into_inner());
            if g.as_ref().map_or(true, |x| (l.0, l.1) < (x.0, x.1)) {
                *g = Some(l);
            }
        }
    };
    let (acc_r, lead_r, kern_r) = (&acc[..], &lay.lead[..], &kernel);

    assert!(ops.len() <= 8, "at most 8 operands");
    if n > 0 && out_len > 0 {
        let rows_per = chunk_rows(n, work_per_row.max(1) * lay.d.max(1));
        let fast = crate::numeric::simd::has_fma();
        let run = |start: usize, block: &mut [f64]| {
            merge(crate::numeric::simd::dispatch(
                fast,
                #[inline(always)]
                || run_chunk(acc_r, lead_r, out_len, kern_r, start, block),
            ))
        };
        if n <= rows_per {
            run(0, &mut out);
        } else {
            out.par_chunks_mut(rows_per * out_len).enumerate().for_each(|(c, block)| run(c * rows_per, block));
        }
    }
    if let Some((_, _, f, own)) = first_fault.into_inner().unwrap_or_else(|e| e.into_inner()) {
        return Err(format_fault(ops, f, &own, nd));
    }
    let out = ArrayD::from_shape_vec(IxDyn(&shape), out).expect("shape matches length");
    Ok(if f32_out { Output::F32(out.mapv(|v| v as f32)) } else { Output::F64(out) })
}

/// Output core of functions returning one point per row: `(d,)`.
pub fn point_core(d: usize) -> Vec<usize> {
    vec![d]
}

/// Output core of functions returning one number per row: `()`.
pub fn scalar_core(_: usize) -> Vec<usize> {
    Vec::new()
}

/// How a batched model function takes one operand (see [`take_row`]).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Take {
    /// A point of the model, checked by the model's point reader; what the
    /// reader returns (the gap of a ball point, `x0/R` on the hyperboloid)
    /// goes to the kernel.
    Point,
    /// Any finite vector (a tangent, the vector a gyration acts on).
    Vector,
    /// A finite scalar.
    Scalar,
}

/// The operands of a batched model function, named as in Python: a
/// `Take::Scalar` becomes a scalar operand, the others point operands.
pub fn model_operands<'a, const N: usize>(args: [(&'static str, Data<'a>, Take); N]) -> ([Operand<'a>; N], [Take; N]) {
    let takes = args.each_ref().map(|a| a.2);
    let ops = args.map(|(name, data, take)| match take {
        Take::Scalar => Operand::scalar(name, data),
        Take::Point | Take::Vector => Operand::point(name, data),
    });
    (ops, takes)
}

/// Checks the operands of one row in order, as `takes` says: points by the
/// model's reader `read` (its value in the result; 1 for the other
/// operands), vectors and scalars finite. The first bad operand is the
/// row's fault.
#[inline(always)]
pub fn take_row<const N: usize>(
    r: &[&[f64]],
    takes: &[Take; N],
    read: impl Fn(&[f64]) -> std::result::Result<f64, Fault>,
) -> std::result::Result<[f64; N], RowFault> {
    let mut v = [1.0; N];
    for i in 0..N {
        match takes[i] {
            Take::Point => v[i] = read(r[i]).map_err(|f| RowFault::new(i, f))?,
            Take::Vector => {
                if !r[i].iter().all(|x| x.is_finite()) {
                    return Err(RowFault::new(i, Fault::NonFinite));
                }
            }
            Take::Scalar => {
                finite_scalar(i, r[i][0])?;
            }
        }
    }
    Ok(v)
}

/// A kernel error for a scalar operand that must be finite.
#[inline]
pub fn finite_scalar(arg: usize, v: f64) -> std::result::Result<f64, RowFault> {
    if v.is_finite() {
        Ok(v)
    } else {
        Err(RowFault::new(arg, Fault::NonFinite))
    }
}

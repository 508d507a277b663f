//! A small dense column-major matrix of `f64`, enough for least squares and its by-products.

/// A dense matrix stored column by column.
#[derive(Debug, Clone, PartialEq)]
pub struct Matrix {
    nrows: usize,
    ncols: usize,
    data: Vec<f64>,
}

impl Matrix {
    /// A matrix of zeros.
    pub fn zeros(nrows: usize, ncols: usize) -> Self {
        Self { nrows, ncols, data: vec![0.0; nrows * ncols] }
    }

    /// The identity matrix of order `n`.
    pub fn identity(n: usize) -> Self {
        let mut m = Self::zeros(n, n);
        for i in 0..n {
            m.set(i, i, 1.0);
        }
        m
    }

    /// Builds a matrix from its columns; every column must have the same length.
    ///
    /// # Panics
    /// Panics if the columns differ in length (a programming error, not a data error).
    pub fn from_columns(cols: &[Vec<f64>]) -> Self {
        let nrows = cols.first().map_or(0, Vec::len);
        assert!(cols.iter().all(|c| c.len() == nrows), "Matrix::from_columns: columns differ in length");
        let mut data = Vec::with_capacity(nrows * cols.len());
        for c in cols {
            data.extend_from_slice(c);
        }
        Self { nrows, ncols: cols.len(), data }
    }

    /// Builds a matrix from its rows; every row must have the same length.
    ///
    /// # Panics
    /// Panics if the rows differ in length (a programming error, not a data error).
    pub fn from_rows(rows: &[Vec<f64>]) -> Self {
        let nrows = rows.len();
        let ncols = rows.first().map_or(0, Vec::len);
        assert!(rows.iter().all(|r| r.len() == ncols), "Matrix::from_rows: rows differ in length");
        let mut m = Self::zeros(nrows, ncols);
        for (i, r) in rows.iter().enumerate() {
            for (j, &v) in r.iter().enumerate() {
                m.set(i, j, v);
            }
        }
        m
    }

    /// Builds a matrix from column-major data.
    ///
    /// # Panics
    /// Panics if `data.len() != nrows * ncols`.
    pub fn from_column_major(nrows: usize, ncols: usize, data: Vec<f64>) -> Self {
        assert_eq!(data.len(), nrows * ncols, "Matrix::from_column_major: wrong data length");
        Self { nrows, ncols, data }
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.nrows
    }

    /// Number of columns.
    pub fn ncols(&self) -> usize {
        self.ncols
    }

    /// The element in row `i`, column `j`.
    pub fn get(&self, i: usize, j: usize) -> f64 {
        debug_assert!(i < self.nrows && j < self.ncols);
        self.data[j * self.nrows + i]
    }

    /// Sets the element in row `i`, column `j`.
    pub fn set(&mut self, i: usize, j: usize, v: f64) {
        debug_assert!(i < self.nrows && j < self.ncols);
        self.data[j * self.nrows + i] = v;
    }

    /// Column `j` as a slice.
    pub fn column(&self, j: usize) -> &[f64] {
        &self.data[j * self.nrows..(j + 1) * self.nrows]
    }

    /// Column `j` as a mutable slice.
    pub fn column_mut(&mut self, j: usize) -> &mut [f64] {
        &mut self.data[j * self.nrows..(j + 1) * self.nrows]
    }

    /// Row `i` copied into a vector.
    pub fn row(&self, i: usize) -> Vec<f64> {
        (0..self.ncols).map(|j| self.get(i, j)).collect()
    }

    /// The column-major data.
    pub fn as_slice(&self) -> &[f64] {
        &self.data
    }

    /// The column-major data, mutable.
    pub fn as_mut_slice(&mut self) -> &mut [f64] {
        &mut self.data
    }

    /// A new matrix made of the given columns, in the given order.
    pub fn select_columns(&self, cols: &[usize]) -> Matrix {
        let mut data = Vec::with_capacity(self.nrows * cols.len());
        for &j in cols {
            data.extend_from_slice(self.column(j));
        }
        Matrix { nrows: self.nrows, ncols: cols.len(), data }
    }

    /// A new matrix made of the given rows, in the given order.
    pub fn select_rows(&self, rows: &[usize]) -> Matrix {
        let mut data = Vec::with_capacity(rows.len() * self.ncols);
        for j in 0..self.ncols {
            let col = self.column(j);
            data.extend(rows.iter().map(|&i| col[i]));
        }
        Matrix { nrows: rows.len(), ncols: self.ncols, data }
    }

    /// The transpose.
    pub fn transpose(&self) -> Matrix {
        let mut t = Matrix::zeros(self.ncols, self.nrows);
        for j in 0..self.ncols {
            for i in 0..self.nrows {
                t.set(j, i, self.get(i, j));
            }
        }
        t
    }

    /// The product `self * other`.
    ///
    /// # Panics
    /// Panics if the inner dimensions differ (a programming error).
    pub fn matmul(&self, other: &Matrix) -> Matrix {
        assert_eq!(self.ncols, other.nrows, "Matrix::matmul: inner dimensions differ");
        let mut out = Matrix::zeros(self.nrows, other.ncols);
        for j in 0..other.ncols {
            let oc = out.column_mut(j);
            for k in 0..self.ncols {
                let b = other.get(k, j);
                if b == 0.0 {
                    continue;
                }
                let ac = &self.data[k * self.nrows..(k + 1) * self.nrows];
                for (o, &a) in oc.iter_mut().zip(ac) {
                    *o += a * b;
                }
            }
        }
        out
    }

    /// The matrix-vector product `self * v`.
    ///
    /// # Panics
    /// Panics if `v.len() != self.ncols()` (a programming error).
    pub fn mul_vec(&self, v: &[f64]) -> Vec<f64> {
        assert_eq!(v.len(), self.ncols, "Matrix::mul_vec: length differs from the column count");
        let mut out = vec![0.0; self.nrows];
        for (j, &b) in v.iter().enumerate() {
            if b == 0.0 {
                continue;
            }
            for (o, &a) in out.iter_mut().zip(self.column(j)) {
                *o += a * b;
            }
        }
        out
    }

    /// Appends a column.
    ///
    /// # Panics
    /// Panics if the column length differs from the row count of a non-empty matrix.
    pub fn push_column(&mut self, col: &[f64]) {
        if self.ncols == 0 && self.data.is_empty() {
            self.nrows = col.len();
        }
        assert_eq!(col.len(), self.nrows, "Matrix::push_column: wrong column length");
        self.data.extend_from_slice(col);
        self.ncols += 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn layout_and_products() {
        let a = Matrix::from_rows(&[vec![1.0, 2.0], vec![3.0, 4.0], vec![5.0, 6.0]]);
        assert_eq!(a.column(1), &[2.0, 4.0, 6.0]);
        let t = a.transpose();
        assert_eq!(t.row(0), vec![1.0, 3.0, 5.0]);
        let g = t.matmul(&a);
        assert_eq!(g.as_slice(), &[35.0, 44.0, 44.0, 56.0]);
        assert_eq!(a.mul_vec(&[1.0, -1.0]), vec![-1.0, -1.0, -1.0]);
        assert_eq!(a.select_rows(&[2, 0]).row(0), vec![5.0, 6.0]);
        assert_eq!(a.select_columns(&[1]).column(0), &[2.0, 4.0, 6.0]);
    }
}

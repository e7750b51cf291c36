// Package nifti reads and writes NIfTI-1 and NIfTI-2 images, the file
// format of the NIfTI Data Format Working Group (headers nifti1.h and
// nifti2.h; the field layout used here is tabulated in the project's
// methods notes, section m).
//
// # What is supported
//
// Reading: NIfTI-1 (348-byte header) and NIfTI-2 (540-byte header), in
// either byte order (found by reading sizeof_hdr both ways); single files
// (.nii, magic "n+1"/"n+2") and header/image pairs (.hdr/.img, magic
// "ni1"/"ni2", see [NewPairReader]); gzip compression (.nii.gz), detected
// by the magic bytes 1f 8b rather than the file name. Extensions are skipped
// by reading up to vox_offset; the reader never seeks, so any [io.Reader]
// works, including a decompressor or a browser Blob reader.
//
// Datatypes: uint8, int8, int16, uint16, int32, uint32, int64, uint64,
// float32 and float64, returned as float32 with scl_slope and scl_inter
// applied (value = scl_slope·stored + scl_inter; a scl_slope of 0 or one
// that is not finite means no scaling). Complex, RGB and float128 data give
// an [*UnsupportedError]. Storage order is x fastest, then y, z, t; a
// volume is a flat []float32 indexed i + nx*(j + ny*k) ([Grid.Index]).
//
// Writing: [WriteMap] (3D) and [Writer] (4D, volume by volume) write
// gzip-compressed little-endian NIfTI-1 with vox_offset 352, zero extension
// bytes, xyzt_units mm and seconds, and float32, int16 or uint8 data.
// NewWriter documents how the qform and sform are set from a [Grid].
//
// # Geometry: which field wins
//
// [Header.Affine] maps 0-based voxel indices to world mm:
//
//  1. the sform (srow_x, srow_y, srow_z) when sform_code > 0;
//  2. otherwise the qform when qform_code > 0: the quaternion (b, c, d)
//     with a = sqrt(max(0, 1 − b² − c² − d²)) (a = 0 and (b, c, d)
//     renormalised if the sum exceeds 1), times diag(pixdim[1], pixdim[2],
//     qfac·pixdim[3]) with qfac = pixdim[0] (0 read as 1), plus
//     (qoffset_x, qoffset_y, qoffset_z);
//  3. otherwise diag(pixdim[1], pixdim[2], pixdim[3]) with no offset.
//
// Lengths are converted from the space unit of xyzt_units to mm (metre
// ×1000, micron ×0.001, none taken as mm), and [Header.TR] converts
// pixdim[4] from the time unit to seconds (ms, µs; none taken as seconds,
// reported by [Header.Warnings]). [Grid.Inverse] maps world mm back to
// voxel coordinates.
//
// # Errors
//
// A field out of range is a [*FieldError] ("nifti: dim[0] = 9, want 1 to
// 7"); data that ends inside a volume is a [*TruncatedError] ("nifti:
// volume 137 of 200: unexpected EOF"); a header cut short wraps
// [io.ErrUnexpectedEOF]. The package never knows file names; callers add
// them. Bad input never panics; a slice of the wrong length passed by the
// caller does.
//
// # Resource limits
//
// [ReadHeader] reads only the header. Check [Header.DataBytes] against a
// budget before allocating anything the size of the image. [NewReader]
// does this itself: it refuses a header whose DataBytes exceeds
// [Limits].MaxDataBytes (default [DefaultMaxDataBytes], 4 GiB) with a
// FieldError, and ReadHeader refuses dims whose data size overflows 63
// bits, all before any allocation. A [Reader] then holds one volume of
// stored bytes plus a 64 KiB read buffer, never the whole series; the
// caller supplies the []float32 for each volume. For gzip input the
// checksum is verified when the stream is read to its end, after the last
// volume, so callers should read to [io.EOF] before trusting the data; at
// most 64 MiB of decompressed bytes past the image data are read for that.
package nifti

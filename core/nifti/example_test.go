package nifti_test

import (
	"fmt"
	"os"

	"winnow/core/nifti"
)

func ExampleReadHeader() {
	f, err := os.Open("../../testdata/nifti/dt_int16.nii")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer f.Close()
	h, err := nifti.ReadHeader(f)
	if err != nil {
		fmt.Println(err)
		return
	}
	tr, _ := h.TR()
	fmt.Printf("dims %v, TR %g s, %s, %d bytes of data\n", h.Dims(), tr, h.Datatype, h.DataBytes())
	// Output: dims [4 3 2 3], TR 2 s, int16, 144 bytes of data
}

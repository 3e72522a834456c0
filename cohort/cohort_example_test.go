package cohort_test

import (
	"context"
	"fmt"
	"log"

	"celerity/cohort"
)

// A cohort from Go: find the acquisitions, run the steps, write the table,
// the plots and the page.
func Example() {
	list, err := cohort.Find([]string{"scans"}, "scans-cohort")
	if err != nil {
		log.Fatal(err)
	}
	s := cohort.DefaultSettings() // speed and aberration, the focus sweep
	s.Steps = append(s.Steps, cohort.StepCorrect)
	table, err := cohort.Run(context.Background(), list, s, cohort.Options{Out: "scans-cohort", Workers: 2})
	if err != nil {
		log.Fatal(err)
	}
	sum, err := cohort.WriteOutputs("scans-cohort", table, cohort.ReportOptions{Caution: "research use only"})
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d of %d acquisitions estimated; mean %.1f m/s\n", sum.OK, sum.Acquisitions, float64(sum.Speed.MeanMPS))
}

func ExampleStatsOf() {
	s := cohort.StatsOf([]float64{1512, 1534, 1541, 1549, 1566})
	fmt.Printf("n %d, mean %.1f, sd %.1f, median %.1f, quartiles %.1f to %.1f\n",
		s.N, float64(s.MeanMPS), float64(s.SDMPS), float64(s.MedianMPS), float64(s.Q1MPS), float64(s.Q3MPS))
	// Output: n 5, mean 1540.4, sd 19.9, median 1541.0, quartiles 1534.0 to 1549.0
}

package vocab_test

import (
	"errors"
	"reflect"
	"testing"

	"github.com/plumbref/plumb/internal/expect"
	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/vocab"
)

type colour uint8

var errColour = errors.New("paint: invalid colour")

var colours = vocab.New("paint", "colour", "which colour the wall is", errColour,
	vocab.W(colour(0), "white", "no pigment"),
	vocab.W(colour(1), "sky-blue", "a light blue"),
).Aliases(map[string]colour{"Blue": 1})

func TestSet(t *testing.T) {
	expect.Equal(t, "paint.colour", colours.Name())
	expect.Equal(t, "sky-blue", colours.String(1))
	expect.Equal(t, "colour(7)", colours.String(7))
	expect.Equal(t, "a light blue", colours.Meaning(1))
	expect.Empty(t, colours.Meaning(7))
	expect.Equal(t, []colour{0, 1}, colours.Values())
	expect.Equal(t, []string{"white", "sky-blue"}, colours.Texts())

	b, err := colours.Marshal(1)
	ensure.NoError(t, err)
	expect.Equal(t, "sky-blue", string(b))
	_, err = colours.Marshal(7)
	expect.EqualError(t, err, "paint: invalid colour: colour = 7; want one of white, sky-blue")
	expect.ErrorIs(t, err, errColour)

	var c colour
	for text, want := range map[string]colour{"sky-blue": 1, " WHITE ": 0, "blue": 1} {
		c = 5
		ensure.NoError(t, colours.Unmarshal(&c, []byte(text)), text)
		expect.Equal(t, want, c, text)
	}
	c = 1
	err = colours.Unmarshal(&c, []byte("sky_blue"))
	expect.EqualError(t, err, `paint: invalid colour: colour = "sky_blue"; want one of white, sky-blue`)
	expect.Equal(t, colour(1), c, "a failed Unmarshal leaves the value alone")
	var e *vocab.Error
	ensure.ErrorAs(t, err, &e)
	expect.Equal(t, vocab.Error{Set: "paint.colour", Where: "colour", Value: `"sky_blue"`, Words: []string{"white", "sky-blue"}},
		vocab.Error{Set: e.Set, Where: e.Where, Value: e.Value, Words: e.Words})
	expect.Equal(t, []error{errColour}, e.Unwrap(), "the sentinels")

	err = colours.Unmarshal(nil, []byte("white"))
	expect.EqualError(t, err, "paint: invalid colour: colour.UnmarshalText: receiver = nil; want a *colour to set")
	expect.ErrorIs(t, err, errColour)

	expect.NoError(t, colours.CheckAt("Paint: Options.Colour", 0))
	expect.EqualError(t, colours.CheckAt("Paint: Options.Colour", 2), "paint: invalid colour: Paint: Options.Colour = 2; want one of white, sky-blue")
}

func TestAt(t *testing.T) {
	errRoom := errors.New("house: invalid room")
	err := vocab.At(colours.Check(9), errRoom, "Build: Room.Colour")
	expect.EqualError(t, err, "house: invalid room: Build: Room.Colour = 9; want one of white, sky-blue")
	expect.ErrorIs(t, err, errRoom)
	expect.ErrorIs(t, err, errColour)
	other := errors.New("not a vocabulary error")
	expect.Equal(t, other, vocab.At(other, errRoom, "x"))
	expect.NoError(t, vocab.At(nil, errRoom, "x"))
}

func TestNewRefusesBadVocabularies(t *testing.T) {
	type kind int
	for name, words := range map[string][]vocab.Word[kind]{
		"none":        nil,
		"upper case":  {vocab.W(kind(0), "Heads", "m")},
		"underscore":  {vocab.W(kind(0), "in_root", "m")},
		"same word":   {vocab.W(kind(0), "a", "m"), vocab.W(kind(1), "a", "n")},
		"same value":  {vocab.W(kind(0), "a", "m"), vocab.W(kind(0), "b", "n")},
		"no meaning":  {vocab.W(kind(0), "a", "")},
		"final stop.": {vocab.W(kind(0), "a", "a sentence.")},
	} {
		expect.Panics(t, func() { vocab.New("p", "kind", "q", nil, words...) }, name)
	}
	expect.Panics(t, func() {
		vocab.New("paint", "colour", "again", nil, vocab.W(colour(0), "white", "m"))
	}, "a type declared twice")
	expect.Panics(t, func() { colours.Aliases(map[string]colour{"red": 9}) }, "an alias of a value with no word")
}

func TestRegistry(t *testing.T) {
	e, ok := vocab.Lookup(typeOf[colour]())
	ensure.True(t, ok)
	expect.Equal(t, "paint.colour", e.Name)
	expect.Equal(t, []vocab.Text{{"white", "no pigment"}, {"sky-blue", "a light blue"}}, e.Words)
	expect.Equal(t, []string{"blue"}, e.Aliases)
	found := false
	for _, x := range vocab.All() {
		found = found || x.Name == "paint.colour"
	}
	expect.True(t, found)
	_, ok = vocab.Lookup(typeOf[string]())
	expect.False(t, ok)
}

func typeOf[T any]() reflect.Type { return reflect.TypeFor[T]() }
